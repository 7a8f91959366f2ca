#include "petsc_error.hpp"

namespace longrun::solve {

void use_exceptions_for_petsc_errors() {
    PetscPushErrorHandler(PetscReturnErrorHandler, nullptr);
}

void check(PetscErrorCode code, const char* what) {
    if (code == 0)
        return;
    const char* text = nullptr;
    PetscErrorMessage(code, &text, nullptr);
    std::string message = std::string(what) + " failed in PETSc/SLEPc";
    if (text)
        message += ": " + std::string(text);
    if (code == PETSC_ERR_MEM)
        message += " (out of memory: try more ranks or nodes)";
    throw LibraryError(message);
}

} // namespace longrun::solve

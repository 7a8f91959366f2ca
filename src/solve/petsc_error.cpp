#include "petsc_error.hpp"

#include <exception>

namespace longrun::solve {

namespace {

// One per thread: PETSc calls its callbacks on the thread that called it.
thread_local std::exception_ptr parked;

} // namespace

PetscErrorCode park_current_exception() noexcept {
    parked = std::current_exception();
    return PETSC_ERR_USER;
}

void use_exceptions_for_petsc_errors() {
    PetscPushErrorHandler(PetscReturnErrorHandler, nullptr);
}

void check(PetscErrorCode code, const char* what) {
    if (code == 0)
        return;
    if (parked)
        std::rethrow_exception(std::exchange(parked, nullptr));
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

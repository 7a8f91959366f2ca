// PETSc/SLEPc error codes become typed exceptions at the boundary, and PETSc
// objects live in RAII handles whose destructors never throw.
#pragma once

#include "io/error.hpp"

#include <petscsys.h>

#include <string>
#include <utility>

namespace longrun::solve {

// A failure inside PETSc or SLEPc: out of memory, a breakdown, a bad option.
struct LibraryError : Error {
    explicit LibraryError(const std::string& m) : Error(ExitCode::numerical, m) {}
};

// A method that will not run on this chain (too many states for gth, a memory
// estimate over the limit). Thrown on every rank alike, after agreeing; `auto`
// moves on to its next method.
struct MethodDeclined : Error {
    explicit MethodDeclined(const std::string& m) : Error(ExitCode::numerical, m) {}
};

// Makes PETSc return error codes instead of printing a trace and aborting; call
// once after PetscInitialize.
void use_exceptions_for_petsc_errors();

// Throws LibraryError for a non-zero code, or the exception a callback parked
// during the call that returned it.
void check(PetscErrorCode code, const char* what);

// For C callbacks run by PETSc or SLEPc (monitors, convergence tests): no
// exception may unwind through their C frames. The callback catches everything,
// parks it here and returns the code this gives; the PETSc call then returns that
// code and its check() rethrows the parked exception. Call only inside catch.
PetscErrorCode park_current_exception() noexcept;

template <class T, PetscErrorCode (*Destroy)(T*)>
class PetscHandle {
  public:
    PetscHandle() = default;
    explicit PetscHandle(T object) : object_(object) {}
    PetscHandle(const PetscHandle&) = delete;
    PetscHandle& operator=(const PetscHandle&) = delete;
    PetscHandle(PetscHandle&& o) noexcept : object_(std::exchange(o.object_, nullptr)) {}
    PetscHandle& operator=(PetscHandle&& o) noexcept {
        if (this != &o) {
            reset();
            object_ = std::exchange(o.object_, nullptr);
        }
        return *this;
    }
    ~PetscHandle() { reset(); }

    T get() const noexcept { return object_; }
    operator T() const noexcept { return object_; }
    // For PETSc's "create into this pointer" calls.
    T* out() noexcept {
        reset();
        return &object_;
    }
    explicit operator bool() const noexcept { return object_ != nullptr; }
    void reset() noexcept {
        if (object_)
            (void)Destroy(&object_); // a failed destroy must not escape a destructor
        object_ = nullptr;
    }

  private:
    T object_ = nullptr;
};

} // namespace longrun::solve

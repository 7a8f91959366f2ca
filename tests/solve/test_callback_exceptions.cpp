// No exception may unwind through PETSc's or SLEPc's C frames. A callback (a
// monitor) catches whatever its C++ code throws, parks it and returns an error
// code; PETSc stops the solve and returns that code, and check() rethrows the
// parked exception itself, so that the caller sees what went wrong (a stop
// signal, a failed checkpoint, out of memory) and not "KSPSolve failed".
#include "solve/handles.hpp"
#include "solve/petsc_error.hpp"

#include <gtest/gtest.h>
#include <petscksp.h>

#include <stdexcept>
#include <string>

namespace longrun::solve {
namespace {

struct MonitorProblem : std::runtime_error {
    using std::runtime_error::runtime_error;
};

// Throws at the third iteration on every rank, as an agreed stop does.
PetscErrorCode throwing_monitor(KSP, PetscInt it, PetscReal, void* calls) {
    try {
        ++*static_cast<int*>(calls);
        if (it == 2)
            throw MonitorProblem("stopped inside the monitor at iteration 2");
    } catch (...) {
        return park_current_exception();
    }
    return 0;
}

// The 1-d Laplacian on 40 points: GMRES without a preconditioner needs many
// iterations, so the monitor's third call comes before convergence.
void laplacian(MatHandle& m, VecHandle& b, VecHandle& x) {
    const PetscInt n = 40;
    check(MatCreateAIJ(PETSC_COMM_WORLD, PETSC_DECIDE, PETSC_DECIDE, n, n, 3, nullptr, 2, nullptr,
                       m.out()),
          "MatCreateAIJ");
    PetscInt lo = 0, hi = 0;
    check(MatGetOwnershipRange(m, &lo, &hi), "MatGetOwnershipRange");
    for (PetscInt i = lo; i < hi; ++i) {
        check(MatSetValue(m, i, i, 2.0, INSERT_VALUES), "MatSetValue");
        if (i > 0)
            check(MatSetValue(m, i, i - 1, -1.0, INSERT_VALUES), "MatSetValue");
        if (i + 1 < n)
            check(MatSetValue(m, i, i + 1, -1.0, INSERT_VALUES), "MatSetValue");
    }
    check(MatAssemblyBegin(m, MAT_FINAL_ASSEMBLY), "MatAssemblyBegin");
    check(MatAssemblyEnd(m, MAT_FINAL_ASSEMBLY), "MatAssemblyEnd");
    check(MatCreateVecs(m, x.out(), b.out()), "MatCreateVecs");
    check(VecSet(b, 1.0), "VecSet");
    check(VecSet(x, 0.0), "VecSet");
}

TEST(CallbackExceptions, MonitorExceptionStopsTheSolveAndReachesTheCaller) {
    MatHandle m;
    VecHandle b, x;
    laplacian(m, b, x);
    KspHandle ksp;
    check(KSPCreate(PETSC_COMM_WORLD, ksp.out()), "KSPCreate");
    check(KSPSetOperators(ksp, m, m), "KSPSetOperators");
    check(KSPSetType(ksp, KSPGMRES), "KSPSetType");
    PC pc = nullptr;
    check(KSPGetPC(ksp, &pc), "KSPGetPC");
    check(PCSetType(pc, PCNONE), "PCSetType");
    check(KSPSetTolerances(ksp, 1e-12, 1e-50, PETSC_DEFAULT, 1000), "KSPSetTolerances");
    int calls = 0;
    check(KSPMonitorSet(ksp, throwing_monitor, &calls, nullptr), "KSPMonitorSet");
    std::string caught;
    try {
        check(KSPSolve(ksp, b, x), "KSPSolve");
    } catch (const MonitorProblem& e) {
        caught = e.what();
    } catch (const std::exception& e) {
        caught = std::string("the wrong exception: ") + e.what();
    }
    EXPECT_EQ(caught, "stopped inside the monitor at iteration 2");
    // The solve stopped there: the monitor saw iterations 0, 1 and 2 only.
    EXPECT_EQ(calls, 3);
    // The parked exception is used up: a later failure is PETSc's own again.
    EXPECT_THROW(check(PETSC_ERR_ARG_WRONG, "a later call"), LibraryError);
    EXPECT_NO_THROW(check(0, "a call that worked"));
}

} // namespace
} // namespace longrun::solve

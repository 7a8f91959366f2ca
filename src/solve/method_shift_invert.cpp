// `shift-invert`: SLEPc Krylov-Schur on (A - sigma I)^{-1}, which turns the
// eigenvalue sought (0 of Q^T, 1 of P^T) into one of modulus about 1/offset,
// far above all others even when the spectrum clusters near it (nearly
// completely decomposable chains). Options prefix: -shift_.
//
// The target sits just outside the spectrum, where A - sigma I is non-singular
// for every chain: all eigenvalues of Q^T have real part <= 0, so sigma =
// offset * lambda > 0 works for a ctmc; all eigenvalues of P^T lie in the unit
// disc, so sigma = 1 + offset works for a dtmc (Gershgorin, common practice).
//   -shift_offset D        (default 1e-6; relative to lambda for a ctmc)
//   -shift_st_ksp_type T   inner solve, default preonly
//   -shift_st_pc_type T    default lu, with -shift_st_pc_factor_mat_solver_type
//                          mumps when this PETSc has it (a parallel LU)
// A Krylov inner solve (e.g. gmres + bjacobi) saves the factors' memory but
// needs a tight inner tolerance, or the outer eigensolver loses accuracy.
//
// SLEPc tests convergence on the transformed eigenvalue, of modulus ~1/sigma,
// so its default relative test is meaningful here even for the eigenvalue 0.
#include "method.hpp"

#include "error_goal.hpp"

#include <fmt/format.h>

#include <cmath>

namespace longrun::solve {

namespace {

// Bytes per state per rank of the LU factors when nothing better is known; errs
// high on purpose (about 3,000 measured with MUMPS on the 1,002,001-state tandem
// line, DESIGN.md).
constexpr double rough_bytes_per_state = 3200;

struct MonitorContext {
    Attempt* attempt;
    const MethodSettings* settings;
    long base_iteration;
};

PetscErrorCode monitor(EPS, PetscInt its, PetscInt, PetscScalar*, PetscScalar*, PetscReal* errest,
                       PetscInt nest, void* raw) {
    auto* ctx = static_cast<MonitorContext*>(raw);
    try {
        if (nest > 0)
            record_iteration(*ctx->attempt, ctx->base_iteration + its, errest[0], *ctx->settings);
    } catch (...) { // stops EPSSolve; its check() rethrows
        return park_current_exception();
    }
    return 0;
}

} // namespace

Attempt run_shift_invert(const TransposedChain& a, Vec warm_start, const MethodSettings& s) {
    MPI_Comm comm = PetscObjectComm((PetscObject)a.matrix.get());
    int ranks = 1;
    MPI_Comm_size(comm, &ranks);
    Attempt attempt;
    attempt.method = "shift-invert";

    PetscReal offset = 1e-6;
    check(PetscOptionsGetReal(nullptr, "shift_", "-offset", &offset, nullptr),
          "PetscOptionsGetReal");
    if (!(offset > 0))
        throw UsageError(fmt::format("-shift_offset {}: must be positive", offset));
    const double sigma = a.time == TimeModel::discrete ? 1.0 + offset : offset * a.uniformisation;

    const double rough = rough_bytes_per_state * double(a.states) / ranks;
    if (s.memory_limit_bytes > 0 && rough > double(s.memory_limit_bytes))
        throw MethodDeclined(
            fmt::format("LU factors of {} states need about {:.3g} MB per rank (rough "
                        "estimate), over the limit of {:.3g} MB",
                        a.states, rough / 1048576.0, s.memory_limit_bytes / 1048576.0));
    if (s.progress)
        s.progress->begin("shift-invert", s.tolerance);

    EpsHandle eps;
    check(EPSCreate(comm, eps.out()), "EPSCreate");
    check(EPSSetOptionsPrefix(eps, "shift_"), "EPSSetOptionsPrefix");
    check(EPSSetOperators(eps, a.matrix, nullptr), "EPSSetOperators");
    check(EPSSetProblemType(eps, EPS_NHEP), "EPSSetProblemType");
    check(EPSSetType(eps, EPSKRYLOVSCHUR), "EPSSetType");
    check(EPSSetWhichEigenpairs(eps, EPS_TARGET_MAGNITUDE), "EPSSetWhichEigenpairs");
    check(EPSSetTarget(eps, sigma), "EPSSetTarget");
    check(EPSSetDimensions(eps, 1, PETSC_DEFAULT, PETSC_DEFAULT), "EPSSetDimensions");
    ST st = nullptr;
    check(EPSGetST(eps, &st), "EPSGetST");
    check(STSetType(st, STSINVERT), "STSetType");
    KSP inner = nullptr;
    check(STGetKSP(st, &inner), "STGetKSP");
    check(KSPSetType(inner, KSPPREONLY), "KSPSetType");
    PC pc = nullptr;
    check(KSPGetPC(inner, &pc), "KSPGetPC");
    check(PCSetType(pc, PCLU), "PCSetType");
#if defined(PETSC_HAVE_MUMPS)
    check(PCFactorSetMatSolverType(pc, MATSOLVERMUMPS), "PCFactorSetMatSolverType");
#endif
    double tol = s.tolerance;
    check(EPSSetTolerances(eps, tol, 1000), "EPSSetTolerances");
    MonitorContext ctx{&attempt, &s, 0};
    check(EPSMonitorSet(eps, monitor, &ctx, nullptr), "EPSMonitorSet");
    check(EPSSetFromOptions(eps), "EPSSetFromOptions");
    PetscScalar target = sigma;
    check(EPSGetTarget(eps, &target), "EPSGetTarget");
    attempt.notes.push_back(fmt::format(
        "target {:.10g} ({} {:.0e}{})", target, a.time == TimeModel::discrete ? "1 +" : "lambda *",
        offset, target != sigma ? ", overridden by -shift_eps_target" : ""));
    if (s.progress)
        s.progress->note("shift-invert: " + attempt.notes.back());

    if (warm_start) {
        Vec initial[1] = {warm_start};
        check(EPSSetInitialSpace(eps, 1, initial), "EPSSetInitialSpace");
    }
    VecHandle x = create_state_vector(a);
    ErrorGoal goal(s);
    for (int round = 0; round < s.max_rounds; ++round) {
        ctx.base_iteration = attempt.iterations;
        check(EPSSolve(eps), "EPSSolve");
        PetscInt its = 0, nconv = 0;
        check(EPSGetIterationNumber(eps, &its), "EPSGetIterationNumber");
        check(EPSGetConverged(eps, &nconv), "EPSGetConverged");
        attempt.iterations += its;
        if (nconv < 1) {
            attempt.notes.push_back(
                fmt::format("round {}: {} iterations, no eigenpair converged", round + 1, its));
            break;
        }
        PetscScalar kr = 0, ki = 0;
        check(EPSGetEigenpair(eps, 0, &kr, &ki, x, nullptr), "EPSGetEigenpair");
        Certificate c = certify(a, x);
        const bool done = goal.judge(x, c);
        attempt.notes.push_back(fmt::format(
            "round {}: {} iterations, eigenvalue {:.15g}{:+.2e}i, certified residual {:.3e}",
            round + 1, its, kr, ki, c.residual));
        keep_if_better(attempt, a, x, c);
        if (done) {
            if (goal.gave_up())
                attempt.notes.push_back(goal.stop_reason());
            break;
        }
        if (round + 1 == s.max_rounds)
            attempt.notes.push_back(fmt::format("{} rounds without a certificate (corrections {})",
                                                s.max_rounds, goal.summary()));
        // The monitor sees no eigenvector, so checkpoints happen between rounds.
        if (s.checkpoint && s.checkpoint->due())
            s.checkpoint->save(attempt.x, "shift-invert", attempt.iterations);
        tol = tightened(tol, c, goal.residual_target());
        check(EPSSetTolerances(eps, tol, 1000), "EPSSetTolerances");
        Vec initial[1] = {attempt.x.get()};
        check(EPSSetInitialSpace(eps, 1, initial), "EPSSetInitialSpace");
    }
    return attempt;
}

} // namespace longrun::solve

// `linear`: the stationary vector as the solution of Q^T x = 0 (or (P^T - I) x = 0)
// by a Krylov method (GMRES by default) with algebraic multigrid (hypre
// BoomerAMG), block-Jacobi/ILU or sparse LU. Options prefix: -linear_.
//
// It first solves the singular system itself from a positive start. If that does
// not reach the certificate, it pins one component (x_p = 1) to make the system
// non-singular. Pinning a state of tiny probability scales the system badly and
// makes the solver's own residual meaningless, so the pin is the largest entry
// of the best estimate so far, never a fixed state.
#include "iterate_start.hpp"
#include "method.hpp"

#include "error_goal.hpp"

#include <fmt/format.h>

#include <cmath>
#include <exception>

namespace longrun::solve {

namespace {

constexpr PetscInt no_pin = -1;

struct MonitorContext {
    Attempt* attempt;
    const MethodSettings* settings;
    long base_iteration;
    // An exception must not unwind through PETSc's C frames: the monitor parks it
    // here, makes KSPSolve return an error, and the caller rethrows it.
    std::exception_ptr parked = nullptr;
};

PetscErrorCode monitor(KSP ksp, PetscInt it, PetscReal rnorm, void* raw) {
    auto* ctx = static_cast<MonitorContext*>(raw);
    try {
        record_iteration(*ctx->attempt, ctx->base_iteration + it, rnorm, *ctx->settings);
        if (ctx->settings->checkpoint && it > 0 && ctx->settings->checkpoint->due()) {
            // GMRES keeps no iterate between restarts: build it (one preconditioner
            // application), only when a checkpoint is due.
            Vec current = nullptr;
            PetscCall(KSPBuildSolution(ksp, nullptr, &current));
            ctx->settings->checkpoint->save(current, "linear", ctx->base_iteration + it);
        }
    } catch (...) { // e.g. the agreed stop on a signal (every rank is here): KSPSolve
                    // returns, and the caller rethrows
        ctx->parked = std::current_exception();
        return PETSC_ERR_USER;
    }
    return 0;
}

void configure_preconditioner(PC pc, LinearPreconditioner kind) {
    switch (kind) {
    case LinearPreconditioner::amg:
#if defined(PETSC_HAVE_HYPRE)
        check(PCSetType(pc, PCHYPRE), "PCSetType(hypre)");
        check(PCHYPRESetType(pc, "boomeramg"), "PCHYPRESetType");
        {
            // The coarsest level of the singular system is singular too: hypre's
            // default exact solve there fails ("error in external library") on some
            // ranks and not others. Smoothing instead costs nothing measurable
            // (22 iterations either way on the 1,002,001-state tandem line). A
            // user's own choice in the options database wins.
            PetscBool set = PETSC_FALSE;
            check(PetscOptionsHasName(nullptr, "linear_", "-pc_hypre_boomeramg_relax_type_coarse",
                                      &set),
                  "PetscOptionsHasName");
            if (!set)
                check(PetscOptionsSetValue(nullptr, "-linear_pc_hypre_boomeramg_relax_type_coarse",
                                           "symmetric-SOR/Jacobi"),
                      "PetscOptionsSetValue");
        }
#else
        check(PCSetType(pc, PCGAMG), "PCSetType(gamg)");
#endif
        break;
    case LinearPreconditioner::ilu:
        check(PCSetType(pc, PCBJACOBI), "PCSetType(bjacobi)"); // ILU(0) on each block
        break;
    case LinearPreconditioner::asm_ilu:
        check(PCSetType(pc, PCASM), "PCSetType(asm)"); // overlap 1, ILU(0) on each block
        break;
    case LinearPreconditioner::lu:
        check(PCSetType(pc, PCLU), "PCSetType(lu)");
#if defined(PETSC_HAVE_MUMPS)
        check(PCFactorSetMatSolverType(pc, MATSOLVERMUMPS), "PCFactorSetMatSolverType");
#endif
        break;
    }
}

// pin == no_pin: the singular system A x = 0 itself.
Attempt solve_pinned(const TransposedChain& a, Vec start, PetscInt pin, const MethodSettings& s,
                     ErrorGoal& goal, Attempt attempt) {
    MPI_Comm comm = PetscObjectComm((PetscObject)a.matrix.get());
    MatHandle m;
    check(MatDuplicate(a.matrix, MAT_COPY_VALUES, m.out()), "MatDuplicate");
    if (a.time == TimeModel::discrete)
        check(MatShift(m, -1.0), "MatShift");

    VecHandle x = create_state_vector(a), b = create_state_vector(a);
    check(VecCopy(start, x), "VecCopy");
    if (pin >= 0) {
        const double at_pin = entry_at(x, pin);
        check(VecScale(x, 1.0 / at_pin), "VecScale"); // x_pin = 1 exactly
    }
    check(VecSet(b, 0.0), "VecSet");
    // The pinned row keeps the row's own scale, so that the system stays balanced.
    VecHandle diagonal = create_state_vector(a);
    check(MatGetDiagonal(m, diagonal), "MatGetDiagonal");
    double d = pin >= 0 ? std::abs(entry_at(diagonal, pin)) : 1.0;
    if (!(d > 0))
        d = 1;
    PetscInt lo = 0, hi = 0;
    check(MatGetOwnershipRange(m, &lo, &hi), "MatGetOwnershipRange");
    const PetscInt mine = (pin >= lo && pin < hi) ? 1 : 0;
    if (pin >= 0)
        check(MatZeroRows(m, mine, &pin, d, x, b), "MatZeroRows");

    KspHandle ksp;
    check(KSPCreate(comm, ksp.out()), "KSPCreate");
    check(KSPSetOptionsPrefix(ksp, "linear_"), "KSPSetOptionsPrefix");
    check(KSPSetOperators(ksp, m, m), "KSPSetOperators");
    check(KSPSetType(ksp, KSPGMRES), "KSPSetType");
    // Right preconditioning: the monitored norm is the true residual of the system.
    check(KSPSetPCSide(ksp, PC_RIGHT), "KSPSetPCSide");
    check(KSPSetNormType(ksp, KSP_NORM_UNPRECONDITIONED), "KSPSetNormType");
    PC pc = nullptr;
    check(KSPGetPC(ksp, &pc), "KSPGetPC");
    configure_preconditioner(pc, s.preconditioner);
    double rtol = s.tolerance;
    const PetscInt max_it = 10000;
    check(KSPSetTolerances(ksp, rtol, 1e-300, PETSC_DEFAULT, max_it), "KSPSetTolerances");
    check(KSPSetInitialGuessNonzero(ksp, PETSC_TRUE), "KSPSetInitialGuessNonzero");
    MonitorContext ctx{&attempt, &s, attempt.iterations};
    check(KSPMonitorSet(ksp, monitor, &ctx, nullptr), "KSPMonitorSet");
    check(KSPSetFromOptions(ksp), "KSPSetFromOptions");
    // Later rounds tighten only the tolerance: an iteration limit set in the
    // options database stays the user's.
    PetscInt limit = max_it;
    check(KSPGetTolerances(ksp, nullptr, nullptr, nullptr, &limit), "KSPGetTolerances");

    VecHandle candidate = create_state_vector(a);
    for (int round = 0; round < s.max_rounds; ++round) {
        ctx.base_iteration = attempt.iterations;
        const PetscErrorCode solved = KSPSolve(ksp, b, x);
        if (ctx.parked)
            std::rethrow_exception(ctx.parked);
        check(solved, "KSPSolve");
        PetscInt its = 0;
        check(KSPGetIterationNumber(ksp, &its), "KSPGetIterationNumber");
        KSPConvergedReason reason;
        check(KSPGetConvergedReason(ksp, &reason), "KSPGetConvergedReason");
        attempt.iterations += its;
        check(VecCopy(x, candidate), "VecCopy");
        Certificate c = certify(a, candidate);
        const bool done = goal.judge(candidate, c);
        attempt.notes.push_back(fmt::format("{} round {}: {} iterations, solver says {}, "
                                            "certified residual {:.3e}",
                                            pin == no_pin ? "singular system" : "pinned system",
                                            round + 1, its, KSPConvergedReasons[reason],
                                            c.residual));
        keep_if_better(attempt, a, candidate, c);
        if (done) {
            if (goal.gave_up())
                attempt.notes.push_back(goal.stop_reason());
            break;
        }
        if (round + 1 == s.max_rounds)
            attempt.notes.push_back(fmt::format("{} rounds without a certificate (corrections {})",
                                                s.max_rounds, goal.summary()));
        if (reason < 0 && its == 0)
            break; // the solver cannot move: more rounds will not help
        rtol = tightened(rtol, c, goal.residual_target());
        check(KSPSetTolerances(ksp, rtol, 1e-300, PETSC_DEFAULT, limit), "KSPSetTolerances");
    }
    return attempt;
}

} // namespace

Attempt run_linear(const TransposedChain& a, Vec warm_start, const MethodSettings& s) {
    Attempt attempt;
    attempt.method = "linear";
    VecHandle start;
    if (warm_start) {
        start = create_state_vector(a);
        check(VecCopy(warm_start, start), "VecCopy");
    } else {
        // A cheap guess at where the mass is, from products with A only.
        start = starting_iterate(a, nullptr);
        lazy_steps(a, start, 20);
    }
    if (s.progress)
        s.progress->begin("linear", s.tolerance);

    ErrorGoal goal(s);
    // -linear_pin STATE: solve the pinned system at a state the user knows to be likely.
    PetscInt chosen = -1;
    PetscBool given = PETSC_FALSE;
    check(PetscOptionsGetInt(nullptr, "linear_", "-pin", &chosen, &given), "PetscOptionsGetInt");
    if (given && (chosen < 0 || chosen >= a.states))
        throw UsageError(
            fmt::format("-linear_pin {} is not a state (0..{})", chosen, a.states - 1));
    if (!given) {
        // First the singular system itself, from a positive start: Krylov
        // corrections live in the range of A, so the start's component along pi
        // survives and no pin has to be guessed. Measured on a 1,002,001-state
        // tandem line: 22 iterations against 32-150 for pinned systems,
        // depending on the pin (benchmarks/RESULTS.md).
        attempt = solve_pinned(a, start, no_pin, s, goal, std::move(attempt));
        if (attempt.certificate.meets(s.tolerance, s.residual_tolerance) || goal.gave_up())
            return attempt;
        if (attempt.x && attempt.certificate.valid)
            check(VecCopy(attempt.x, start), "VecCopy");
    }
    // The pinned system, at the largest entry of the best estimate so far.
    PetscInt pin = largest_entry(start).first;
    if (given)
        pin = chosen;
    attempt.notes.push_back(
        fmt::format("pinning state {} (estimated probability {:.2e})", pin, entry_at(start, pin)));
    if (s.progress)
        s.progress->note("linear: " + attempt.notes.back());
    attempt = solve_pinned(a, start, pin, s, goal, std::move(attempt));
    return attempt;
}

} // namespace longrun::solve

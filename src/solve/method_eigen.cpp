// `eigen`: SLEPc Krylov-Schur for the eigenvector of P^T at eigenvalue 1 (a ctmc
// through uniformisation, P = I + Q / lambda). "Largest real part" is asked for
// rather than "largest magnitude": a periodic chain also has eigenvalues such as
// -1 on the unit circle. Options prefix: -eigen_.
#include "method.hpp"

#include "error_goal.hpp"

#include <fmt/format.h>

#include <cmath>

namespace longrun::solve {

namespace {

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

Attempt run_eigen(const TransposedChain& a, Vec warm_start, const MethodSettings& s) {
    MPI_Comm comm = PetscObjectComm((PetscObject)a.matrix.get());
    Attempt attempt;
    attempt.method = "eigen";
    MatHandle uniformised;
    Mat p = a.matrix;
    if (a.time == TimeModel::continuous) {
        check(MatDuplicate(a.matrix, MAT_COPY_VALUES, uniformised.out()), "MatDuplicate");
        check(MatScale(uniformised, 1.0 / a.uniformisation), "MatScale");
        check(MatShift(uniformised, 1.0), "MatShift");
        p = uniformised;
    }
    if (s.progress)
        s.progress->begin("eigen", s.tolerance);

    EpsHandle eps;
    check(EPSCreate(comm, eps.out()), "EPSCreate");
    check(EPSSetOptionsPrefix(eps, "eigen_"), "EPSSetOptionsPrefix");
    check(EPSSetOperators(eps, p, nullptr), "EPSSetOperators");
    check(EPSSetProblemType(eps, EPS_NHEP), "EPSSetProblemType");
    check(EPSSetType(eps, EPSKRYLOVSCHUR), "EPSSetType");
    check(EPSSetWhichEigenpairs(eps, EPS_LARGEST_REAL), "EPSSetWhichEigenpairs");
    check(EPSSetDimensions(eps, 1, PETSC_DEFAULT, PETSC_DEFAULT), "EPSSetDimensions");
    // The eigenvalue sought is 1, so relative and absolute tests agree.
    double tol = s.tolerance;
    check(EPSSetTolerances(eps, tol, 100000), "EPSSetTolerances");
    MonitorContext ctx{&attempt, &s, 0};
    check(EPSMonitorSet(eps, monitor, &ctx, nullptr), "EPSMonitorSet");
    check(EPSSetFromOptions(eps), "EPSSetFromOptions");

    VecHandle x = create_state_vector(a);
    if (warm_start) {
        Vec initial[1] = {warm_start};
        check(EPSSetInitialSpace(eps, 1, initial), "EPSSetInitialSpace");
    }
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
        // SLEPc's monitor sees no eigenvector, so checkpoints happen between rounds.
        if (s.checkpoint && s.checkpoint->due())
            s.checkpoint->save(attempt.x, "eigen", attempt.iterations);
        tol = tightened(tol, c, goal.residual_target());
        check(EPSSetTolerances(eps, tol, 100000), "EPSSetTolerances");
        Vec initial[1] = {attempt.x.get()};
        check(EPSSetInitialSpace(eps, 1, initial), "EPSSetInitialSpace");
    }
    return attempt;
}

} // namespace longrun::solve

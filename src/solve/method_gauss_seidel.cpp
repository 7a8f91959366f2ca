// `gauss-seidel`: (S)SOR sweeps on the singular system A x = 0, i.e. Q^T x = 0
// (ctmc) or (P^T - I) x = 0 (dtmc), with PETSc's MatSOR and zero right-hand
// side. The sweeps keep the component along pi and damp the rest; renormalising
// after every sweep keeps the iterate at sum 1. Options prefix: -gs_.
//   -gs_omega W           relaxation factor (default 1: Gauss-Seidel)
//   -gs_fallback_omega W  used when the sweeps at omega 1 stall (default 0.9)
//   -gs_sweep forward|backward|symmetric   (default symmetric: measured on the
//                         301 x 301 tandem line, symmetric sweeps certified 1e-10
//                         in 6,291 iterations (12.3 s), while 6,000 forward sweeps
//                         only got from 3.8e-4 to 1.1e-4)
//   -gs_max_it N          sweeps (default 20,000)
//   -gs_window N          sweeps between checks for a stalled residual (default 100)
//
// Gauss-Seidel on a Markov chain need not converge: its iteration matrix can
// have eigenvalues of modulus 1 besides the one at pi, depending on the order
// of the states. Measured here on a 12 x 10 tandem line: forward sweeps stall
// at residual 5.0e-3 for ever, while backward, symmetric, or forward sweeps
// with omega 0.95 converge. Under-relaxation (0 < omega < 1) on an irreducible
// singular M-matrix is semiconvergent (recalled from memory), so when the
// residual stalls at omega 1, the sweeps go on with -gs_fallback_omega.
//
// In parallel MatSOR sweeps only over each rank's own rows and takes the other
// ranks' entries from the previous sweep: block Jacobi between ranks with
// Gauss-Seidel inside each block, so the iteration (and its count) depends on
// the number of ranks; on one rank it is the true sequential sweep.
#include "method.hpp"

#include "error_goal.hpp"

#include "convergence_watch.hpp"
#include "iterate_start.hpp"

#include <fmt/format.h>

#include <cmath>
#include <string>

namespace longrun::solve {

namespace {

MatSORType sweep_type(const std::string& name) {
    if (name == "forward")
        return SOR_LOCAL_FORWARD_SWEEP;
    if (name == "backward")
        return SOR_LOCAL_BACKWARD_SWEEP;
    if (name == "symmetric")
        return SOR_LOCAL_SYMMETRIC_SWEEP;
    throw UsageError("-gs_sweep " + name + ": choose forward, backward or symmetric");
}

} // namespace

Attempt run_gauss_seidel(const TransposedChain& a, Vec warm_start, const MethodSettings& s) {
    Attempt attempt;
    attempt.method = "gauss-seidel";

    PetscReal omega = 1.0;
    PetscReal fallback_omega = 0.9;
    PetscInt max_it = 20000, window = 100;
    char sweep_name[32] = "symmetric";
    PetscBool omega_given = PETSC_FALSE;
    check(PetscOptionsGetReal(nullptr, "gs_", "-omega", &omega, &omega_given),
          "PetscOptionsGetReal");
    check(PetscOptionsGetReal(nullptr, "gs_", "-fallback_omega", &fallback_omega, nullptr),
          "PetscOptionsGetReal");
    check(PetscOptionsGetInt(nullptr, "gs_", "-max_it", &max_it, nullptr), "PetscOptionsGetInt");
    check(PetscOptionsGetInt(nullptr, "gs_", "-window", &window, nullptr), "PetscOptionsGetInt");
    check(PetscOptionsGetString(nullptr, "gs_", "-sweep", sweep_name, sizeof sweep_name, nullptr),
          "PetscOptionsGetString");
    const MatSORType sweep = sweep_type(sweep_name);
    if (!(omega > 0 && omega < 2))
        throw UsageError(fmt::format("-gs_omega {}: SOR needs 0 < omega < 2", omega));
    if (!(fallback_omega > 0 && fallback_omega < 1))
        throw UsageError(fmt::format("-gs_fallback_omega {}: must be in (0, 1)", fallback_omega));

    // The system matrix Q^T or P^T - I, as a copy without inodes: PETSc's SOR on
    // inodes (runs of rows with equal patterns) is block Gauss-Seidel, which
    // inverts diagonal blocks that may be singular here (all of the Land of Oz
    // chain's 3 x 3 P^T - I is one such block) and stalled on it.
    MatHandle m;
    check(MatDuplicate(a.matrix, MAT_COPY_VALUES, m.out()), "MatDuplicate");
    check(MatSetOption(m, MAT_USE_INODES, PETSC_FALSE), "MatSetOption(MAT_USE_INODES)");
    if (a.time == TimeModel::discrete)
        check(MatShift(m, -1.0), "MatShift");
    check(MatAssemblyBegin(m, MAT_FINAL_ASSEMBLY), "MatAssemblyBegin");
    check(MatAssemblyEnd(m, MAT_FINAL_ASSEMBLY), "MatAssemblyEnd");
    int ranks = 1;
    MPI_Comm_size(PetscObjectComm((PetscObject)a.matrix.get()), &ranks);
    attempt.notes.push_back(fmt::format(
        "{} sweeps, omega {}{}", sweep_name, omega,
        ranks > 1
            ? fmt::format(", Gauss-Seidel within each of {} ranks, Jacobi between them", ranks)
            : std::string()));
    if (s.progress) {
        s.progress->begin("gauss-seidel", s.tolerance);
        s.progress->note("gauss-seidel: " + attempt.notes.back());
    }

    VecHandle x = starting_iterate(a, warm_start);
    normalise(x);
    VecHandle zero = create_state_vector(a), y = create_state_vector(a);
    VecHandle candidate = create_state_vector(a);
    check(VecSet(zero, 0.0), "VecSet");
    const double scale = a.time == TimeModel::discrete ? 1.0 : 1.0 / a.uniformisation;
    ErrorGoal goal(s);
    ConvergenceWatch watch(window, goal.residual_target(), max_it);
    std::string stopped = fmt::format("sweep limit {} reached (-gs_max_it)", max_it);

    long it = 0;
    for (; it < max_it; ++it) {
        check(MatSOR(m, zero, omega, sweep, 0.0, 1, 1, x), "MatSOR");
        const double sum = normalise(x);
        if (!std::isfinite(sum) || sum == 0) {
            stopped = "the iterate became zero or not finite";
            ++it;
            break;
        }
        // The certificate's residual of the normalised iterate: one product, about
        // the price of a sweep, bought for an honest history.
        check(MatMult(m, x, y), "MatMult");
        PetscReal norm = 0;
        check(VecNorm(y, NORM_1, &norm), "VecNorm");
        const double residual = norm * scale;
        record_iteration(attempt, attempt.iterations + it, residual, s);
        if (residual <= goal.residual_target()) {
            check(VecCopy(x, candidate), "VecCopy");
            Certificate c = certify(a, candidate);
            const bool done = goal.judge(candidate, c);
            keep_if_better(attempt, a, candidate, c);
            if (done) {
                stopped = goal.gave_up() ? goal.stop_reason()
                                         : fmt::format("certified after sweep {}", it + 1);
                ++it;
                break;
            }
            watch.set_target(goal.residual_target());
        }
        if (s.checkpoint && s.checkpoint->due())
            s.checkpoint->save(x, "gauss-seidel", attempt.iterations + it + 1);
        if (auto reason = watch.observe(it + 1, residual)) {
            if (reason->stalled && !omega_given && omega == 1.0) {
                omega = fallback_omega;
                attempt.notes.push_back(fmt::format("omega {} from sweep {} on; at omega 1 {}",
                                                    omega, it + 2, reason->text));
                if (s.progress)
                    s.progress->note("gauss-seidel: " + attempt.notes.back());
                watch = ConvergenceWatch(window, goal.residual_target(), max_it);
                continue;
            }
            stopped = "stopped early: " + reason->text;
            ++it;
            break;
        }
    }
    attempt.iterations += it;

    if (!attempt.certificate.meets(s.tolerance, s.residual_tolerance)) {
        check(VecCopy(x, candidate), "VecCopy");
        keep_if_better(attempt, a, candidate, certify(a, candidate));
    }
    attempt.notes.push_back(fmt::format("{} sweeps, {}; certified residual {:.3e}; corrections {}",
                                        attempt.iterations, stopped, attempt.certificate.residual,
                                        goal.summary()));
    return attempt;
}

} // namespace longrun::solve

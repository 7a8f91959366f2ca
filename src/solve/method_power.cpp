// `power`: x <- x P, i.e. x <- A x on the transposed matrix (a ctmc through
// uniformisation, P = I + Q / lambda). Options prefix: -power_.
//
// The product that makes a step also certifies the iterate it started from: for
// x >= 0 with sum 1, d = P^T x - x (dtmc) or Q^T x / lambda (ctmc) is exactly the
// certificate's residual vector, so every iteration records the true residual
// for the price of one norm.
//
// Periodic chains: plain power iteration oscillates forever on a chain of period
// d > 1 (P has eigenvalues on the unit circle other than 1). The lazy chain
// (I + P)/2 has the same stationary law and no such eigenvalues, but it mixes
// about half as fast, so it is not used blindly:
//  - a state with a self-loop (P_ii > 0) in an irreducible chain makes it
//    aperiodic (common practice), so the plain iteration starts there;
//  - with no self-loop anywhere the period is unknown and the lazy chain is used
//    from the start;
//  - a plain iteration whose successive steps point in opposite directions (an
//    eigenvalue near -1) or whose residual stalls switches to the lazy chain.
// -power_lazy true|false forces either choice.
#include "method.hpp"

#include "error_goal.hpp"

#include "convergence_watch.hpp"
#include "iterate_start.hpp"

#include <fmt/format.h>

#include <cmath>

namespace longrun::solve {

namespace {

// Largest self-loop probability of the (uniformised) chain.
double largest_self_loop(const TransposedChain& a) {
    VecHandle diagonal = create_state_vector(a);
    check(MatGetDiagonal(a.matrix, diagonal), "MatGetDiagonal");
    if (a.time == TimeModel::discrete)
        return largest_entry(diagonal).second;
    // P_ii = 1 + q_ii / lambda: the largest where q_ii is closest to 0.
    return 1.0 + largest_entry(diagonal).second / a.uniformisation;
}

// Cosine between two successive steps: near -1 when the iterate oscillates.
double step_cosine(Vec previous, Vec current) {
    PetscScalar dot = 0;
    PetscReal n1 = 0, n2 = 0;
    check(VecDot(previous, current, &dot), "VecDot");
    check(VecNorm(previous, NORM_2, &n1), "VecNorm");
    check(VecNorm(current, NORM_2, &n2), "VecNorm");
    return n1 > 0 && n2 > 0 ? dot / (n1 * n2) : 0.0;
}

} // namespace

Attempt run_power(const TransposedChain& a, Vec warm_start, const MethodSettings& s) {
    Attempt attempt;
    attempt.method = "power";

    PetscInt max_it = 200000, window = 500, renormalise_every = 100;
    check(PetscOptionsGetInt(nullptr, "power_", "-max_it", &max_it, nullptr), "PetscOptionsGetInt");
    check(PetscOptionsGetInt(nullptr, "power_", "-window", &window, nullptr), "PetscOptionsGetInt");
    PetscBool forced_lazy = PETSC_FALSE, lazy_given = PETSC_FALSE;
    check(PetscOptionsGetBool(nullptr, "power_", "-lazy", &forced_lazy, &lazy_given),
          "PetscOptionsGetBool");

    bool lazy = false;
    if (lazy_given) {
        lazy = forced_lazy;
        attempt.notes.push_back(
            fmt::format("{} chain, as -power_lazy asks", lazy ? "lazy" : "plain"));
    } else {
        const double self_loop = largest_self_loop(a);
        lazy = !(self_loop > 0);
        attempt.notes.push_back(
            lazy ? std::string("lazy chain (I + P)/2: no state has a self-loop, so the chain may "
                               "be periodic")
                 : fmt::format("plain iteration: a self-loop (largest P_ii = {:.3g}) makes the "
                               "irreducible chain aperiodic",
                               self_loop));
    }
    if (s.progress) {
        s.progress->begin("power", s.tolerance);
        s.progress->note("power: " + attempt.notes.back());
    }

    VecHandle x = starting_iterate(a, warm_start);
    normalise(x);
    VecHandle y = create_state_vector(a), step = create_state_vector(a);
    VecHandle earlier_step = create_state_vector(a), candidate = create_state_vector(a);
    ErrorGoal goal(s);
    ConvergenceWatch watch(window, goal.residual_target(), max_it);
    std::string stopped = fmt::format("iteration limit {} reached (-power_max_it)", max_it);

    long it = 0;
    for (; it < max_it; ++it) {
        check(MatMult(a.matrix, x, y), "MatMult");
        if (a.time == TimeModel::discrete) {
            check(VecWAXPY(step, -1.0, x, y), "VecWAXPY"); // P^T x - x
        } else {
            check(VecCopy(y, step), "VecCopy");
            check(VecScale(step, 1.0 / a.uniformisation), "VecScale"); // Q^T x / lambda
        }
        PetscReal residual = 0;
        check(VecNorm(step, NORM_1, &residual), "VecNorm");
        record_iteration(attempt, attempt.iterations + it, residual, s);

        if (residual <= goal.residual_target()) {
            check(VecCopy(x, candidate), "VecCopy");
            Certificate c = certify(a, candidate);
            const bool done = goal.judge(candidate, c);
            keep_if_better(attempt, a, candidate, c);
            if (done) {
                stopped = goal.gave_up() ? goal.stop_reason()
                                         : fmt::format("certified at iteration {}", it);
                break;
            }
            watch.set_target(goal.residual_target());
        }
        if (!std::isfinite(residual)) {
            stopped = "the iterate is no longer finite";
            break;
        }

        // Oscillation test once per window, on plain iterations only: two
        // successive steps nearly opposite mean an eigenvalue near -1.
        if (!lazy && !lazy_given && it % window == window - 1)
            check(VecCopy(step, earlier_step), "VecCopy");
        if (!lazy && !lazy_given && it % window == 0 && it > 0) {
            const double cosine = step_cosine(earlier_step, step);
            if (cosine < -0.9) {
                lazy = true;
                attempt.notes.push_back(fmt::format(
                    "switched to the lazy chain at iteration {}: successive steps point in "
                    "opposite directions (cosine {:.3f}), the chain is (nearly) periodic",
                    it, cosine));
                watch = ConvergenceWatch(window, goal.residual_target(), max_it);
            }
        }

        check(VecAXPY(x, lazy ? 0.5 : 1.0, step), "VecAXPY");
        // The step keeps the sum in exact arithmetic; rounding drifts it slowly.
        if (it % renormalise_every == renormalise_every - 1)
            normalise(x);
        if (s.checkpoint && s.checkpoint->due())
            s.checkpoint->save(x, "power", attempt.iterations + it + 1);

        if (auto reason = watch.observe(it, residual)) {
            if (reason->stalled && !lazy && !lazy_given) {
                lazy = true;
                attempt.notes.push_back(fmt::format(
                    "switched to the lazy chain at iteration {}: {}", it, reason->text));
                watch = ConvergenceWatch(window, goal.residual_target(), max_it);
                continue;
            }
            stopped = "stopped early: " + reason->text;
            break;
        }
    }
    attempt.iterations += std::min<long>(it + 1, max_it);

    if (!attempt.certificate.meets(s.tolerance, s.residual_tolerance)) {
        check(VecCopy(x, candidate), "VecCopy");
        keep_if_better(attempt, a, candidate, certify(a, candidate));
    }
    attempt.notes.push_back(fmt::format("{} iterations ({}), {}; certified residual {:.3e}; "
                                        "corrections {}",
                                        attempt.iterations, lazy ? "lazy" : "plain", stopped,
                                        attempt.certificate.residual, goal.summary()));
    return attempt;
}

} // namespace longrun::solve

// The forward-error estimate behind "certified": ||pi_hat - pi||_1, not the
// residual. A small residual alone says little: the error is about the residual
// times the chain's condition, and nearly decomposable or near-critical chains
// are ill-conditioned (README "What certified means").
//
// Estimator: the corrections of a refinement sequence, as in iterative
// refinement (Demmel, Hida, Kahan, Li, Mukherjee, Riedy, ACM TOMS 32, 2006:
// the norm of the last correction estimates the error while successive
// corrections shrink by at least a factor 2). A method that reaches the residual
// target offers its iterate x_0; the target is then lowered by a factor
// (-estimate_step, default 10) and the same method goes on from there, offering
// x_1, x_2, ... Each offer yields the correction d_k = ||x_k - x_{k-1}||_1 and
// the ratio rho_k = d_k / d_{k-1}. While rho_k <= 1/2 the error of x_k is at
// most sum_{j>k} d_j <= d_k (a geometric tail with ratio <= 1/2), so d_k is the
// estimate of x_k's error; it overstates it by about 1/rho, the step factor
// when the error shrinks with the residual. Corrections that do not shrink
// (stagnation: the residual falls while the error does not) give no estimate;
// the method goes on, and ends uncertified when the steps run out.
//
// At the rounding floor (residual <= -estimate_floor, default 1e-14) the
// residual cannot fall further and corrections stop shrinking. The estimate is
// then the larger of the last two corrections (for direct's refinement with
// exact factors, these measure the rounding error of the solve itself), and
// never less than the largest error-to-residual ratio seen on the way down
// times the floor residual: a slow iteration that stalls at the floor then
// keeps the condition it showed earlier. An iterate that reached the floor at
// once (fast methods on well-conditioned chains) has no such history: there the
// estimate is the spread of the iterates alone.
//
// Cost: the steps from the first offer to the certificate, about
// log10(100 * condition) more orders of residual (benchmarks/RESULTS.md,
// "Cost of the error estimate").
#pragma once

#include "certificate.hpp"
#include "handles.hpp"

#include <string>
#include <vector>

namespace longrun::solve {

struct MethodSettings;

inline constexpr const char* refinement_estimate_name =
    "refinement: last correction of a sequence with residuals falling 10x per step";

class ErrorGoal {
  public:
    // `exact_corrections`: the method's corrections at the floor are exact solves.
    explicit ErrorGoal(const MethodSettings& s, bool exact_corrections = false);

    // The residual the method should iterate to now.
    double residual_target() const noexcept { return target_; }

    // Collective. Judges a certified candidate `x` (normalised, as certify left
    // it) with certificate `c`: when it meets residual_target(), it becomes the
    // next point of the sequence and `c` gets its error estimate. Returns true
    // when the method should stop: the certificate is met, or more steps cannot
    // give an estimate (then `stop_reason()` says why).
    bool judge(Vec x, Certificate& c);

    bool gave_up() const noexcept { return !stop_reason_.empty(); }
    const std::string& stop_reason() const noexcept { return stop_reason_; }
    // One line for the method's notes: the corrections and ratios so far.
    std::string summary() const;

  private:
    double error_tolerance_;
    double residual_tolerance_; // > 0: certified on the residual (--residual-tol)
    double step_ = 10;
    double floor_ = 1e-14;
    double amplification_ = 0; // largest correction / residual of the point before
    int floor_points_ = 0;     // points whose predecessor was at the floor too
    int max_points_ = 16;
    bool exact_corrections_ = false;
    double target_ = 0;
    VecHandle previous_;
    double previous_residual_ = 0;
    std::vector<double> corrections_;
    std::string stop_reason_;
};

} // namespace longrun::solve

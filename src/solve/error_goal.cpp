#include "error_goal.hpp"

#include "method.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <limits>

namespace longrun::solve {

namespace {

// No computed vector is closer to pi than the rounding of its own entries.
constexpr double rounding_limit = std::numeric_limits<double>::epsilon();

double real_option(const char* name, double fallback) {
    PetscReal value = fallback;
    check(PetscOptionsGetReal(nullptr, "estimate_", name, &value, nullptr), "PetscOptionsGetReal");
    return value;
}

// Read as a real, so that any number is checked here rather than failing
// inside PETSc's integer parser; -1 when it is no whole number in 0..1000.
int int_option(const char* name, int fallback) {
    const double value = real_option(name, fallback);
    return value >= 0 && value <= 1000 && value == std::floor(value) ? static_cast<int>(value) : -1;
}

double distance_1(Vec x, Vec y) {
    VecHandle d;
    check(VecDuplicate(x, d.out()), "VecDuplicate");
    check(VecWAXPY(d, -1.0, y, x), "VecWAXPY");
    PetscReal norm = 0;
    check(VecNorm(d, NORM_1, &norm), "VecNorm");
    return norm;
}

} // namespace

ErrorGoal::ErrorGoal(const MethodSettings& s, bool exact_corrections)
    : error_tolerance_(s.tolerance), residual_tolerance_(s.residual_tolerance),
      exact_corrections_(exact_corrections) {
    step_ = real_option("-step", step_);
    floor_ = real_option("-floor", floor_);
    max_points_ = int_option("-max_steps", max_points_);
    if (!(step_ >= 2) || !std::isfinite(step_) || !(floor_ >= 0) || !std::isfinite(floor_) ||
        max_points_ < 3)
        throw UsageError(fmt::format("-estimate_step must be a number >= 2, -estimate_floor a "
                                     "number >= 0 and -estimate_max_steps a whole number in "
                                     "3..1000 (given {}, {}, {})",
                                     step_, floor_, max_points_));
    target_ = residual_tolerance_ > 0 ? residual_tolerance_ : error_tolerance_;
}

bool ErrorGoal::judge(Vec x, Certificate& c) {
    if (!c.valid || !(c.residual <= target_))
        return false;
    const bool at_floor = c.residual <= floor_;
    const double residual = c.residual;
    target_ = at_floor ? floor_ : std::max(residual / step_, floor_);
    if (!previous_) {
        check(VecDuplicate(x, previous_.out()), "VecDuplicate");
        check(VecCopy(x, previous_), "VecCopy");
        previous_residual_ = residual;
        return false;
    }
    const double d = distance_1(x, previous_);
    // A round of a Krylov method may lower the residual far more than one step
    // asks; the correction then measures the error of the point before, and the
    // part of the error left scales with the residual (as the step factor
    // assumes for ordinary steps).
    const double beyond_step =
        previous_residual_ > 0 ? std::min(1.0, step_ * residual / previous_residual_) : 1.0;
    const bool both_at_floor = at_floor && previous_residual_ <= floor_;
    if (previous_residual_ > floor_)
        amplification_ = std::max(amplification_, d / previous_residual_);
    check(VecCopy(x, previous_), "VecCopy");
    previous_residual_ = residual;
    corrections_.push_back(d);
    const int points = static_cast<int>(corrections_.size()) + 1;
    // Points at the floor are not 10x steps (every iterate there qualifies), so
    // the geometric argument does not hold between them.
    const double before = corrections_.size() >= 2 ? corrections_[corrections_.size() - 2] : 0;
    const bool shrinking = corrections_.size() >= 2 && d <= 0.5 * before && (d > 0 || before > 0);
    if (both_at_floor) {
        ++floor_points_;
        // The correction into the floor measured the error of the point before
        // it (amplification_ keeps what it taught); only corrections between
        // floor points measure the noise there.
        const double noise = floor_points_ >= 2 ? std::max(d, before) : d;
        c.error_estimate = std::max({noise, amplification_ * residual, rounding_limit});
        c.error_estimate_method =
            exact_corrections_
                ? "refinement at the rounding floor: the larger of the last two corrections with "
                  "exact factors"
                : "at the rounding floor: the larger of the last two corrections and the "
                  "error-to-residual ratio seen before times the residual";
    } else if (shrinking) {
        c.error_estimate = std::max(d * beyond_step, rounding_limit);
        c.error_estimate_method = refinement_estimate_name;
    }
    const bool estimated = std::isfinite(c.error_estimate);
    if (residual_tolerance_ > 0) {
        if (estimated || residual > residual_tolerance_)
            return estimated;
    } else if (estimated && c.error_estimate <= error_tolerance_) {
        return true;
    }
    if (floor_points_ >= 3) {
        stop_reason_ =
            estimated
                ? fmt::format("at the rounding floor (residual {:.1e}) the estimated error {:.1e} "
                              "cannot fall below the tolerance {:.1e}: the chain is too "
                              "ill-conditioned for it in double precision (corrections {}; "
                              "error-to-residual ratio seen {:.1e})",
                              residual, c.error_estimate, error_tolerance_, summary(),
                              amplification_)
                : fmt::format("at the rounding floor (residual {:.1e}) the corrections ({}) no "
                              "longer shrink: the error cannot be estimated",
                              residual, summary());
        return true;
    }
    if (points >= max_points_) {
        stop_reason_ = fmt::format("{} refinement steps without meeting the error tolerance "
                                   "(corrections {})",
                                   points - 1, summary());
        return true;
    }
    return false;
}

std::string ErrorGoal::summary() const {
    std::string out;
    for (double d : corrections_)
        out += fmt::format("{}{:.1e}", out.empty() ? "" : ", ", d);
    return out.empty() ? "none yet" : out;
}

} // namespace longrun::solve

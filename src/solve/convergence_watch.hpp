// When a classical iteration should give up early: its residual has stopped
// falling, or the rate it falls at would need far more iterations than the
// budget allows. Judged on the best residual so far, once per window, so that
// the non-monotone start of an iteration does not trigger it.
#pragma once

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <optional>
#include <string>

namespace longrun::solve {

struct StopReason {
    bool stalled = false; // no progress at all (as opposed to progress too slow)
    std::string text;
};

class ConvergenceWatch {
  public:
    ConvergenceWatch(long window, double target, long max_iterations)
        : window_(std::max(1L, window)), target_(target), max_iterations_(max_iterations) {}

    // A refinement step lowered the residual sought.
    void set_target(double target) noexcept { target_ = target; }

    // A reason to stop, or nothing. Same inputs on every rank give the same answer.
    std::optional<StopReason> observe(long iteration, double residual) {
        if (std::isfinite(residual))
            best_ = std::min(best_, residual);
        if (iteration == 0 || iteration % window_ != 0)
            return std::nullopt;
        const double before = at_window_start_;
        at_window_start_ = best_;
        ++windows_;
        if (windows_ < 3 || !std::isfinite(before) || best_ <= target_)
            return std::nullopt; // the first windows are a transient
        // Less than 1 % gained over a whole window: rounding floor or no convergence.
        if (best_ > 0.99 * before)
            return StopReason{true, fmt::format("the residual stalled at {:.3e} (less than 1 % "
                                                "better over the last {} iterations)",
                                                best_, window_)};
        const double rate = std::pow(best_ / before, 1.0 / double(window_));
        const double needed = std::log(target_ / best_) / std::log(rate);
        // Judged late and with a slack of 4: early rates are often pessimistic.
        if (windows_ >= 5 && double(iteration) + needed > 4.0 * double(max_iterations_))
            return StopReason{false, fmt::format("at the observed rate (residual x{:.6f} per "
                                                 "iteration) reaching {:.1e} from {:.3e} needs "
                                                 "about {:.2g} more iterations, far beyond the "
                                                 "limit of {}",
                                                 rate, target_, best_, needed, max_iterations_)};
        return std::nullopt;
    }

    double best() const { return best_; }

  private:
    long window_;
    double target_;
    long max_iterations_;
    long windows_ = 0;
    double best_ = INFINITY;
    double at_window_start_ = INFINITY;
};

} // namespace longrun::solve

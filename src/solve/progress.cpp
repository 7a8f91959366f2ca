#include "progress.hpp"

#include <fmt/format.h>

#include <cmath>
#include <cstdio>
#include <unistd.h>

namespace longrun::solve {

Progress::Progress(MPI_Comm comm, bool enabled, double batch_interval_seconds) {
    int rank = 0;
    MPI_Comm_rank(comm, &rank);
    enabled_ = enabled && rank == 0;
    root_ = rank == 0;
    terminal_ = ::isatty(STDERR_FILENO) != 0;
    interval_ = terminal_ ? 1.0 : batch_interval_seconds;
    start_ = phase_start_ = last_print_ = Clock::now();
}

void Progress::begin(const std::string& phase, double target) {
    phase_ = phase;
    target_ = target;
    first_residual_ = 0;
    phase_start_ = last_print_ = Clock::now();
}

double Progress::elapsed_seconds() const {
    return std::chrono::duration<double>(Clock::now() - start_).count();
}

void Progress::update(long iteration, double residual) {
    if (!enabled_ || !(residual > 0) || !std::isfinite(residual))
        return;
    if (first_residual_ == 0)
        first_residual_ = residual;
    const auto now = Clock::now();
    if (std::chrono::duration<double>(now - last_print_).count() < interval_)
        return;
    last_print_ = now;
    const double in_phase = std::chrono::duration<double>(now - phase_start_).count();
    std::string eta = "?";
    // Residuals fall roughly geometrically: extrapolate the log-rate so far.
    const double done = std::log10(first_residual_ / residual);
    const double left = std::log10(residual / target_);
    if (done > 0 && in_phase > 0)
        eta = left <= 0 ? "0 s" : fmt::format("{:.0f} s", left / (done / in_phase));
    std::fprintf(stderr, "  %s: iteration %ld  solver residual %.2e  elapsed %.1f s  eta %s\n",
                 phase_.c_str(), iteration, residual, elapsed_seconds(), eta.c_str());
    std::fflush(stderr);
}

void Progress::note(const std::string& line) {
    if (!enabled_)
        return;
    std::fprintf(stderr, "  %s\n", line.c_str());
    std::fflush(stderr);
}

} // namespace longrun::solve

namespace longrun::solve {

void Progress::warn(const std::string& line) {
    if (!root_)
        return;
    std::fprintf(stderr, "longrun: warning: %s\n", line.c_str());
    std::fflush(stderr);
}

} // namespace longrun::solve

// Progress lines for long solves, printed by rank 0 on stderr: at most once a
// second on a terminal, every `batch_interval` seconds in batch logs, so that a
// job's log shows it is alive without drowning in lines.
#pragma once

#include <mpi.h>

#include <chrono>
#include <string>

namespace longrun::solve {

class Progress {
  public:
    Progress(MPI_Comm comm, bool enabled, double batch_interval_seconds = 10.0);
    // Starts a new phase (e.g. "linear"); resets the rate estimate.
    void begin(const std::string& phase, double target);
    // Cheap when nothing is printed; call on every iteration.
    void update(long iteration, double residual);
    // Prints a line of its own, regardless of timing (rank 0 only).
    void note(const std::string& line);
    // Printed even with progress lines off (rank 0 only): something the user must see.
    void warn(const std::string& line);
    double elapsed_seconds() const;

  private:
    using Clock = std::chrono::steady_clock;
    bool enabled_ = false;
    bool root_ = false;
    bool terminal_ = false;
    double interval_ = 1.0;
    std::string phase_;
    double target_ = 0;
    double first_residual_ = 0;
    Clock::time_point start_, phase_start_, last_print_;
};

} // namespace longrun::solve

// Checkpoints during a solve: the current iterate, written atomically every
// `interval` seconds (rank 0's clock decides, so all ranks write together).
// A failed write warns once and ends checkpointing; the solve goes on, since
// losing a long run to a full scratch disk would be worse than losing the
// checkpoint.
//
// A stop signal (SIGTERM, SIGINT) on any rank makes a checkpoint due at once
// (agreed by a reduction, never one rank alone); save() then writes it and
// throws the agreed stop (ExitCode::interrupted) that ends the solve. Without a
// path the writer only stops the solve: nothing is written.
#pragma once

#include "io/iterate_file.hpp"
#include "solve/method.hpp"

#include <mpi.h>

#include <chrono>
#include <functional>
#include <span>
#include <string>
#include <vector>

namespace longrun::cli {

class CheckpointWriter : public solve::IterateSink {
  public:
    // An empty `path`: no checkpoints, only the stop on a signal.
    CheckpointWriter(MPI_Comm comm, std::string path, double interval_seconds,
                     io::CheckpointInfo chain, RowRange rows, solve::Progress* progress);
    bool due() override;
    // Throws the agreed stop after writing when due() saw a stop signal.
    void save(Vec x, const std::string& method, long iteration) override;
    // Collective: the stop for a signal that came while no method was iterating;
    // `x` (may be null) is the iterate to keep. Returns when no rank got a signal.
    void stop_if_signalled(Vec x, const std::string& method, long iteration);
    long written() const noexcept { return written_; }
    // Collective translation of this rank's iterate from the solve's row order to
    // the chain file's, for a solve on moved rows (graph layout): checkpoints are
    // always stored in file order, so any layout and rank count can resume them.
    using ToFileOrder = std::function<std::vector<double>(std::span<const double>)>;
    void set_file_order(ToFileOrder to_file_order) { to_file_order_ = std::move(to_file_order); }
    const std::string& path() const noexcept { return path_; }

  private:
    using Clock = std::chrono::steady_clock;
    MPI_Comm comm_;
    std::string path_;
    double interval_;
    io::CheckpointInfo info_;
    RowRange rows_;
    solve::Progress* progress_;
    Clock::time_point started_, last_;
    bool enabled_ = true;
    long written_ = 0;
    int stop_signal_ = 0; // agreed: the same on every rank
    ToFileOrder to_file_order_;

    // Writes x; false (with the reason in `why`) when nothing was written.
    bool write(Vec x, const std::string& method, long iteration, std::string& why);
    [[noreturn]] void stop(Vec x, const std::string& method, long iteration);
};

} // namespace longrun::cli

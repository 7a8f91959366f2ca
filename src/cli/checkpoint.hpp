// Checkpoints during a solve: the current iterate, written atomically every
// `interval` seconds (rank 0's clock decides, so all ranks write together).
// A failed write warns once and ends checkpointing; the solve goes on, since
// losing a long run to a full scratch disk would be worse than losing the
// checkpoint.
#pragma once

#include "io/iterate_file.hpp"
#include "solve/method.hpp"

#include <mpi.h>

#include <chrono>
#include <string>

namespace longrun::cli {

class CheckpointWriter : public solve::IterateSink {
  public:
    CheckpointWriter(MPI_Comm comm, std::string path, double interval_seconds,
                     io::CheckpointInfo chain, RowRange rows, solve::Progress* progress);
    bool due() override;
    void save(Vec x, const std::string& method, long iteration) override;
    long written() const noexcept { return written_; }
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
};

} // namespace longrun::cli

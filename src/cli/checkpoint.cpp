#include "checkpoint.hpp"

#include <fmt/format.h>

#include <algorithm>

namespace longrun::cli {

CheckpointWriter::CheckpointWriter(MPI_Comm comm, std::string path, double interval_seconds,
                                   io::CheckpointInfo chain, RowRange rows,
                                   solve::Progress* progress)
    : comm_(comm), path_(std::move(path)), interval_(interval_seconds), info_(std::move(chain)),
      rows_(rows), progress_(progress), started_(Clock::now()), last_(started_) {}

bool CheckpointWriter::due() {
    int rank = 0;
    MPI_Comm_rank(comm_, &rank);
    int now_due = 0;
    if (rank == 0)
        now_due =
            enabled_ && std::chrono::duration<double>(Clock::now() - last_).count() >= interval_;
    MPI_Bcast(&now_due, 1, MPI_INT, 0, comm_);
    return now_due != 0;
}

void CheckpointWriter::save(Vec x, const std::string& method, long iteration) {
    if (!enabled_)
        return;
    std::vector<double> local(rows_.size());
    const PetscScalar* v = nullptr;
    double mine = 0;
    if (VecGetArrayRead(x, &v) == 0) {
        for (std::size_t i = 0; i < local.size(); ++i) {
            local[i] = std::max(0.0, static_cast<double>(v[i])); // a warm start needs no sign
            mine += local[i];
        }
        VecRestoreArrayRead(x, &v);
    }
    double total = 0;
    MPI_Allreduce(&mine, &total, 1, MPI_DOUBLE, MPI_SUM, comm_);
    if (!(total > 0))
        return; // nothing worth keeping yet
    for (double& p : local)
        p /= total;
    io::CheckpointInfo info = info_;
    info.method = method;
    info.iteration = static_cast<std::uint64_t>(std::max(0L, iteration));
    info.elapsed_seconds += std::chrono::duration<double>(Clock::now() - started_).count();
    try {
        io::write_checkpoint(path_, comm_, info, rows_, local);
        ++written_;
        if (progress_)
            progress_->note(
                fmt::format("checkpoint {} written ({} iteration {})", path_, method, iteration));
    } catch (const Error& e) { // agreed inside write_checkpoint: every rank is here
        enabled_ = false;
        if (progress_)
            progress_->warn(std::string("checkpoints stopped: ") + e.what());
    }
    last_ = Clock::now();
}

} // namespace longrun::cli

#include "checkpoint.hpp"

#include "stop_signal.hpp"

#include <fmt/format.h>

#include <algorithm>

namespace longrun::cli {

CheckpointWriter::CheckpointWriter(MPI_Comm comm, std::string path, double interval_seconds,
                                   io::CheckpointInfo chain, RowRange rows,
                                   solve::Progress* progress)
    : comm_(comm), path_(std::move(path)), interval_(interval_seconds), info_(std::move(chain)),
      rows_(rows), progress_(progress), started_(Clock::now()), last_(started_) {
    enabled_ = !path_.empty();
}

bool CheckpointWriter::due() {
    int rank = 0;
    MPI_Comm_rank(comm_, &rank);
    // One reduction carries both verdicts: rank 0's clock, and the stop signal
    // that any rank may have received (the largest signal number wins).
    int mine[2] = {0, stop_signal_received()};
    if (rank == 0)
        mine[0] =
            enabled_ && std::chrono::duration<double>(Clock::now() - last_).count() >= interval_;
    int agreed[2] = {0, 0};
    MPI_Allreduce(mine, agreed, 2, MPI_INT, MPI_MAX, comm_);
    stop_signal_ = agreed[1];
    return agreed[0] != 0 || stop_signal_ != 0;
}

bool CheckpointWriter::write(Vec x, const std::string& method, long iteration, std::string& why) {
    // On moved rows the vector holds this rank's rows of the solve, not rows_.
    PetscInt held = static_cast<PetscInt>(rows_.size());
    if (to_file_order_)
        (void)VecGetLocalSize(x, &held); // fails only on a corrupt Vec
    std::vector<double> local(static_cast<std::size_t>(held));
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
    if (!(total > 0)) {
        why = "no iterate worth keeping yet";
        return false;
    }
    if (to_file_order_)
        local = to_file_order_(local);
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
        why = e.what();
        if (progress_)
            progress_->warn(std::string("checkpoints stopped: ") + e.what());
        return false;
    }
    last_ = Clock::now();
    return true;
}

void CheckpointWriter::save(Vec x, const std::string& method, long iteration) {
    if (stop_signal_ != 0)
        stop(x, method, iteration);
    if (!enabled_)
        return;
    std::string why;
    if (!write(x, method, iteration, why))
        last_ = Clock::now(); // a skipped write waits a full interval too
}

void CheckpointWriter::stop_if_signalled(Vec x, const std::string& method, long iteration) {
    stop_signal_ = agreed_stop_signal(comm_);
    if (stop_signal_ != 0)
        stop(x, method, iteration);
}

void CheckpointWriter::stop(Vec x, const std::string& method, long iteration) {
    const std::string head = fmt::format("stopped by {} at iteration {} ({})",
                                         signal_name(stop_signal_), iteration, method);
    if (path_.empty())
        throw stopped(head + "; no checkpoint written (none was asked for: with --checkpoint "
                             "FILE a stopped solve can be resumed)");
    const bool had_failed = !enabled_;
    std::string why = "an earlier checkpoint write failed";
    if (!had_failed && x && write(x, method, iteration, why))
        throw stopped(fmt::format(
            "{}; checkpoint written to {}: run the same command with --resume {} to continue", head,
            path_, path_));
    if (!x)
        why = "no iterate yet";
    const std::string earlier =
        written_ > 0 ? fmt::format(" ({} holds the one written before)", path_) : "";
    throw stopped(fmt::format("{}; no checkpoint written now: {}{}", head, why, earlier));
}

} // namespace longrun::cli

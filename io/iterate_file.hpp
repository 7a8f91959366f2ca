// Iterates on disk: checkpoints written while a solve runs, and the
// /distribution of any earlier result or checkpoint read back as a warm start.
// A checkpoint (schema "longrun.checkpoint") holds /distribution (normalised,
// negatives clipped) plus what is needed to tell whether it belongs to a chain.
#pragma once

#include "../partition/row_range.hpp"

#include <mpi.h>

#include <cstdint>
#include <string>
#include <vector>

namespace longrun::io {

inline constexpr const char* checkpoint_schema = "longrun.checkpoint";

struct CheckpointInfo {
    std::string chain_path;
    std::string chain_hash; // io/chain_hash.hpp; empty in checkpoints from before it
    std::uint64_t states = 0;
    std::uint64_t transitions = 0;
    std::string method; // the method that produced the iterate
    std::uint64_t iteration = 0;
    double elapsed_seconds = 0; // since the solve (or the first of its resumptions) began
};

// Collective; atomic (temporary name, then rename). Throws OutputError on every rank.
void write_checkpoint(const std::string& path, MPI_Comm comm, const CheckpointInfo& info,
                      RowRange rows, const std::vector<double>& local);

// Collective. Reads the checkpoint's description; throws InputError (agreed) when
// the file is not a checkpoint.
CheckpointInfo read_checkpoint_info(const std::string& path, MPI_Comm comm);

// Collective. This rank's slice of /distribution in `path` (a result file or a
// checkpoint), checked against the chain's size: InputError (agreed) naming the
// file and the first bad row. Entries must be finite and >= 0; they need not sum
// to 1 exactly (a checkpoint of an unfinished solve), but must have positive sum.
// Collective. The root attribute chain_hash of a result or checkpoint, empty when
// the file has none (written before longrun recorded it, or by another tool).
std::string read_recorded_chain_hash(const std::string& path, MPI_Comm comm);

std::vector<double> read_distribution_slice(const std::string& path, MPI_Comm comm, RowRange rows,
                                            std::uint64_t states);

} // namespace longrun::io

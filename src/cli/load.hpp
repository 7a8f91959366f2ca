// Reading a chain onto the ranks: an even first split to read the row pointer,
// a balanced contiguous partition, then each rank's own slice.
#pragma once

#include "io/chain_file.hpp"

#include <mpi.h>

#include <optional>

namespace longrun::cli {

struct LoadedChain {
    io::ChainHeader header;
    io::Chain chain; // this rank's rows
    io::ValidationReport validation;
};

// Collective. `rows`, when given, overrides the partition (tests use it to give a
// rank no rows).
LoadedChain load_chain(const std::string& path, MPI_Comm comm, const io::ValidationOptions& options,
                       std::optional<RowRange> rows = std::nullopt);

} // namespace longrun::cli

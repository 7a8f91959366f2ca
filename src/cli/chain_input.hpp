// A chain from either kind of file onto the ranks: a longrun chain file (HDF5,
// each rank reads its slice) or a Matrix Market file (every rank reads it whole
// and keeps its slice; the kind is told from the numbers unless given).
#pragma once

#include "load.hpp"

#include <optional>
#include <string>

namespace longrun::cli {

// By content ("%%MatrixMarket" banner) or by the .mtx extension.
bool is_matrix_market(const std::string& path);

// Collective. `kind` is for Matrix Market files only (chain files say their
// kind); without it the kind is detected. Errors are agreed over the ranks and
// name the file and row, counting Matrix Market rows from 1.
LoadedChain load_any_chain(const std::string& path, MPI_Comm comm,
                           std::optional<io::ChainKind> kind, const io::ValidationOptions& options);

} // namespace longrun::cli

// A chain from either kind of file onto the ranks: a longrun chain file (HDF5,
// each rank reads its slice) or a Matrix Market file (every rank reads it whole
// and keeps its slice; the kind is told from the numbers unless given).
#pragma once

#include "load.hpp"

#include "io/mpi_agree.hpp"

#include <optional>
#include <string>

namespace longrun::cli {

// By content ("%%MatrixMarket" banner) or by the .mtx extension.
bool is_matrix_market(const std::string& path);

// A validation fault of a chain read from the Matrix Market file `file`, told
// in the file's terms: its line (row, or column when transposed), counted from 1.
Error in_matrix_market_terms(const LocalFault& fault, const std::string& file, bool transposed);

// Collective. `kind` and `transposed` (the file's columns are the source
// states) are for Matrix Market files only (chain files say their kind);
// without `kind` it is detected. Errors are agreed over the ranks and name the
// file and row, counting Matrix Market rows from 1.
LoadedChain load_any_chain(const std::string& path, MPI_Comm comm,
                           std::optional<io::ChainKind> kind, const io::ValidationOptions& options,
                           bool transposed = false);

} // namespace longrun::cli

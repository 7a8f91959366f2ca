// Matrix Market (coordinate, real, general) conversion to and from chains.
// Rows are source states, 1-based in the file. For a ctmc the file may carry the
// generator's diagonal (q_ii = -sum of the row's rates): it is checked and
// dropped on reading, and written back on writing, so that files round-trip.
#pragma once

#include "chain.hpp"

#include <string>

namespace longrun::io {

// Throws InputError naming the file and line on anything malformed.
Chain read_matrix_market(const std::string& path, ChainKind kind);

// Writes the whole chain (rows [0, states)) atomically (temporary name, rename).
void write_matrix_market(const std::string& path, const Chain& chain);

} // namespace longrun::io

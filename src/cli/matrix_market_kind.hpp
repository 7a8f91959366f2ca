// Whether a Matrix Market file holds a ctmc generator or a dtmc transition
// matrix, told from its numbers: a generator's rows sum to 0 with a negative
// diagonal, a transition matrix's rows sum to 1 (columns, for a transposed file).
#pragma once

#include "io/chain.hpp"

#include <string>

namespace longrun::cli {

// Serial. Throws InputError naming the file and the first row that fits neither
// (or the line the Matrix Market reader refuses), and --transposed when the
// columns would fit. `transposed`: the file's columns are the source states.
io::ChainKind matrix_market_kind(const std::string& path, bool transposed = false);

} // namespace longrun::cli

// Matrix Market (coordinate, real, general) conversion to and from chains.
// Rows are source states, 1-based in the file, unless the file is read as
// transposed (it holds P^T or Q^T, as many published matrices do). For a ctmc
// the file may carry the generator's diagonal (q_ii = -sum of the row's rates):
// it is checked against the rates and dropped on reading, and written back on
// writing, so that files round-trip.
#pragma once

#include "chain.hpp"

#include <string>

namespace longrun::io {

struct MatrixMarketReading {
    // The file's columns are the source states (it holds P^T or Q^T).
    bool transposed = false;
    // ctmc: allowed |q_ii + sum of the state's rates|, relative to the larger of
    // the two. dtmc: the |row sum - 1| beyond which a file whose columns all sum
    // to 1 is refused as transposed (the row sums themselves are the validator's).
    double row_sum_tolerance = 1e-8;
};

// Throws InputError naming the file and line on anything malformed, and naming
// the first source state whose diagonal (ctmc) or row sum (dtmc) says the file
// was read in the wrong orientation, with --transposed as the way out.
Chain read_matrix_market(const std::string& path, ChainKind kind,
                         const MatrixMarketReading& reading = {});

// Writes the whole chain (rows [0, states)) atomically (temporary name, rename).
void write_matrix_market(const std::string& path, const Chain& chain);

} // namespace longrun::io

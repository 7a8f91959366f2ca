// Grassmann-Taksar-Heyman elimination: the exact reference for small chains.
// Subtraction-free, so it keeps full relative accuracy even in tiny entries
// (Grassmann, Taksar & Heyman, Operations Research 33(5), 1985).
#pragma once

#include "local_rows.hpp"

#include <vector>

namespace longrun::solve {

// Serial and dense: O(n^2) memory, O(n^3) time; for up to a few thousand states.
// `rows` must hold the whole chain. Throws NumericalError when the chain is
// reducible in a way that leaves a state with no path towards lower indices.
std::vector<double> gth_stationary(const LocalRows& rows);

} // namespace longrun::solve

// The k most likely states with their variable values.
#pragma once

#include "io/chain.hpp"
#include "io/summary_record.hpp"

#include <mpi.h>

#include <span>
#include <vector>

namespace longrun::summary {

// Collective; every rank returns the same list, most likely first (ties: lower
// index first).
std::vector<io::LikelyStateRecord> likely_states(MPI_Comm comm, const io::Chain& chain,
                                                 std::span<const double> pi, std::size_t k);

} // namespace longrun::summary

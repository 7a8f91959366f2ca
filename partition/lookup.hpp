// Distributed lookup of per-row values: every rank holds one value per row of its
// contiguous range and asks for the values of arbitrary rows. Used to learn the
// part or new index of the states a rank's transitions point at, without any rank
// holding a whole-chain array.
#pragma once

#include "row_range.hpp"

#include <mpi.h>

#include <cstdint>
#include <span>
#include <vector>

namespace longrun::partition {

// Index of the range holding `row` (ranges cover [0, states) in rank order).
int owner_of(const std::vector<RowRange>& ranges, std::uint64_t row);

// Collective. `ranges` are all ranks' rows (gather_ranges), `mine` this rank's
// values, one per row of ranges[rank]. Returns the value of each key, in order.
std::vector<std::uint64_t> look_up(MPI_Comm comm, const std::vector<RowRange>& ranges,
                                   std::span<const std::uint64_t> mine,
                                   std::span<const std::uint64_t> keys);

} // namespace longrun::partition

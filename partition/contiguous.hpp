// Contiguous row ownership. The default partition balances the nonzeros each rank
// will hold in A = Q^T or P^T (transitions plus one diagonal entry per row), and it
// is computed without any rank ever holding the whole row pointer.
//
// The seam for graph partitioners: a partitioner turns the chain's structure into
// an ownership range plus (later) a permutation; callers only see RowRange.
#pragma once

#include "row_range.hpp"

#include <mpi.h>

#include <cstdint>
#include <vector>

namespace longrun::partition {

// The first, structure-blind split: rows as evenly as possible, the remainder to
// the lowest ranks.
RowRange even_rows(std::uint64_t states, int parts, int index);

// Collective. `offsets_slice` is offsets[even.begin .. even.end] of the CSR row
// pointer (even.size() + 1 global values) for this rank's even split. Returns this
// rank's rows so that each rank's cost, transitions + rows, is as equal as rows
// allow. A single row with very many transitions can leave ranks with no rows.
RowRange balance_by_nonzeros(MPI_Comm comm, RowRange even,
                             const std::vector<std::uint64_t>& offsets_slice, std::uint64_t states,
                             std::uint64_t transitions);

// All ranks' ranges from one rank's: collective (allgather). An empty range is
// placed where the rows before it end ({e, e}), whatever its begin was, so that
// begins never decrease and owner_of's search holds (rows forced per rank may
// give the empty ones any begin).
std::vector<RowRange> gather_ranges(MPI_Comm comm, RowRange mine);

// Whether the non-empty ranges follow each other in rank order and cover
// [0, states) exactly, as PETSc's layout and every lookup here assume.
bool ranges_cover_in_order(const std::vector<RowRange>& ranges, std::uint64_t states);

} // namespace longrun::partition

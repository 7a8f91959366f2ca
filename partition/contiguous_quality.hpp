// The quality numbers of the rows as they are held (contiguous blocks), straight
// from each rank's CSR: no symmetrised adjacency, no lookup of other ranks'
// parts. Owners are known from the ranges alone, so the volume, the off-rank
// nonzeros and the imbalance take one pass over the local targets; only the
// edge cut needs other ranks (is the reverse transition there too?), and it
// exchanges just the off-rank transitions, which a good split keeps few.
#pragma once

#include "adjacency.hpp"
#include "csr_view.hpp"
#include "quality.hpp"

#include <mpi.h>

#include <vector>

namespace longrun::partition {

// Collective; every rank takes part, with or without rows. `ranges` are all
// ranks' rows, as from gather_ranges, covering [0, csr.states) in rank order.
// One pass over the local targets: every number of measure_quality with
// parts_in_place except the edge cut, which is left 0. Throws std::runtime_error
// on every rank when a target lies outside every range.
Quality contiguous_quality(MPI_Comm comm, const CsrView& csr, const std::vector<RowRange>& ranges);

// Collective: the edge cut of the symmetrised graph under the rows as held, by
// asking the owner of each off-rank transition's target whether the reverse
// transition exists (one exchange of the off-rank transitions). Same
// preconditions and failure as contiguous_quality.
std::uint64_t contiguous_edge_cut(MPI_Comm comm, const CsrView& csr,
                                  const std::vector<RowRange>& ranges);

// Collective: the same edge cut when the symmetrised adjacency is built anyway
// (one pass over it, no exchange).
std::uint64_t edge_cut_in_place(MPI_Comm comm, const Adjacency& adjacency);

} // namespace longrun::partition

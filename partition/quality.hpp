// How good an assignment of rows to ranks is for the distributed product
// y = A x with A = Q^T (or P^T): the row of A for state j needs x_i for every
// transition i -> j, so a rank must receive x_i once for each source i held
// elsewhere that points into its rows.
#pragma once

#include "adjacency.hpp"
#include "csr_view.hpp"

#include <mpi.h>

#include <cstdint>
#include <span>
#include <vector>

namespace longrun::partition {

struct Quality {
    // Edges {i, j} of the symmetrised adjacency whose ends sit on different ranks.
    std::uint64_t edge_cut = 0;
    // Distinct off-rank vector entries each rank receives per product: summed over
    // the ranks, and the largest single rank's share.
    std::uint64_t volume = 0;
    std::uint64_t max_volume = 0;
    // Distinct transitions i -> j with i and j on different ranks: the nonzeros
    // of the off-diagonal blocks of A (what the products' ghost updates feed).
    std::uint64_t off_rank_nonzeros = 0;
    // Largest rank's nonzeros over the mean, nonzeros = transitions + one diagonal
    // entry per row (the cost partition/contiguous balances).
    double imbalance = 1;
    std::uint64_t max_nonzeros = 0;
};

// Collective. `part` gives the rank each of this rank's rows (csr.rows) goes to;
// `ranges` are all ranks' current rows, as from gather_ranges. Parts are 0 ..
// comm size - 1.
Quality measure_quality(MPI_Comm comm, const CsrView& csr, const Adjacency& adjacency,
                        const std::vector<RowRange>& ranges, std::span<const std::uint64_t> part);

// (The rows as they are held are measured more cheaply by contiguous_quality.)

// The part vector of the current contiguous layout: every row stays put.
std::vector<std::uint64_t> parts_in_place(MPI_Comm comm, RowRange rows);

} // namespace longrun::partition

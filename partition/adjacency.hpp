// The symmetrised adjacency of a chain: the pattern of A + A^T without the
// diagonal, held in the same rows as the chain. Graph partitioners want an
// undirected graph, and an edge cut only means something on one.
#pragma once

#include "csr_view.hpp"

#include <mpi.h>

#include <vector>

namespace longrun::partition {

struct Adjacency {
    RowRange rows;
    std::vector<std::uint64_t> offsets{0};
    std::vector<std::uint64_t> neighbours; // global, sorted and distinct per row
};

// Collective: the reverse of every transition is sent to the rank holding its
// target (`ranges` are all ranks' rows, as from gather_ranges).
Adjacency symmetrised_adjacency(MPI_Comm comm, const CsrView& csr,
                                const std::vector<RowRange>& ranges);

} // namespace longrun::partition

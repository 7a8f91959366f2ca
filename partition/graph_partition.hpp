// Graph partitioning of the symmetrised adjacency with PETSc's MatPartitioning,
// PT-Scotch by default (every MatPartitioning option stays reachable under the
// prefix -partition_, e.g. -partition_mat_partitioning_type parmetis where built).
// Vertex weights are the rows' nonzeros, so parts balance the product's work.
#pragma once

#include "adjacency.hpp"
#include "csr_view.hpp"

#include <mpi.h>

#include <cstdint>
#include <vector>

namespace longrun::partition {

inline constexpr const char* graph_options_prefix = "partition_";

// Collective; needs PETSc initialised. Returns the part (0 .. comm size - 1) of
// each of this rank's rows. Throws std::runtime_error when PETSc fails or the
// graph is too large for PETSc's index type.
std::vector<std::uint64_t> graph_parts(MPI_Comm comm, const CsrView& csr,
                                       const Adjacency& adjacency);

} // namespace longrun::partition

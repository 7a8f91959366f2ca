#include "graph_partition.hpp"

#include "contiguous.hpp"
#include "redistribution.hpp"

#include <petscmat.h>

#include <limits>
#include <stdexcept>
#include <string>

namespace longrun::partition {

namespace {

void call(PetscErrorCode code, const char* what) {
    if (code != 0)
        throw std::runtime_error(std::string("graph partitioning: ") + what +
                                 " failed (PETSc error " + std::to_string(code) + ")");
}

// Owns a PETSc allocation until the Mat or partitioner takes it over.
template <class T>
struct PetscArray {
    T* data = nullptr;
    ~PetscArray() { (void)PetscFree(data); }
    T* release() { return std::exchange(data, nullptr); }
};

struct MatOwner {
    Mat m = nullptr;
    ~MatOwner() { (void)MatDestroy(&m); }
};
struct PartitioningOwner {
    MatPartitioning p = nullptr;
    ~PartitioningOwner() { (void)MatPartitioningDestroy(&p); }
};
struct IsOwner {
    IS is = nullptr;
    ~IsOwner() { (void)ISDestroy(&is); }
};

// PT-Scotch proper, on an adjacency whose every rank holds at least one row.
std::vector<std::uint64_t> scotch_parts(MPI_Comm comm, std::uint64_t states,
                                        const Adjacency& adjacency,
                                        const std::vector<std::uint64_t>& vertex_weight) {
    int size = 1;
    MPI_Comm_size(comm, &size);
    const auto n = static_cast<PetscInt>(adjacency.rows.size());
    PetscArray<PetscInt> ia, ja, weights;
    call(PetscMalloc1(n + 1, &ia.data), "PetscMalloc1");
    call(PetscMalloc1(static_cast<PetscInt>(adjacency.neighbours.size()), &ja.data),
         "PetscMalloc1");
    call(PetscMalloc1(n, &weights.data), "PetscMalloc1");
    for (PetscInt i = 0; i <= n; ++i)
        ia.data[i] = static_cast<PetscInt>(adjacency.offsets[static_cast<std::size_t>(i)]);
    for (std::size_t k = 0; k < adjacency.neighbours.size(); ++k)
        ja.data[k] = static_cast<PetscInt>(adjacency.neighbours[k]);
    for (PetscInt i = 0; i < n; ++i)
        weights.data[i] = static_cast<PetscInt>(vertex_weight[static_cast<std::size_t>(i)]);

    MatOwner adj;
    call(MatCreateMPIAdj(comm, n, static_cast<PetscInt>(states), ia.data, ja.data, nullptr, &adj.m),
         "MatCreateMPIAdj");
    ia.release(); // the Mat frees them now
    ja.release();

    PartitioningOwner partitioner;
    call(MatPartitioningCreate(comm, &partitioner.p), "MatPartitioningCreate");
    call(MatPartitioningSetAdjacency(partitioner.p, adj.m), "MatPartitioningSetAdjacency");
    call(MatPartitioningSetNParts(partitioner.p, size), "MatPartitioningSetNParts");
    call(MatPartitioningSetType(partitioner.p, MATPARTITIONINGPTSCOTCH), "MatPartitioningSetType");
    call(MatPartitioningSetVertexWeights(partitioner.p, weights.release()),
         "MatPartitioningSetVertexWeights");
    call(PetscObjectSetOptionsPrefix(reinterpret_cast<PetscObject>(partitioner.p),
                                     graph_options_prefix),
         "PetscObjectSetOptionsPrefix");
    call(MatPartitioningSetFromOptions(partitioner.p), "MatPartitioningSetFromOptions");
    IsOwner parts;
    call(MatPartitioningApply(partitioner.p, &parts.is), "MatPartitioningApply");

    const PetscInt* p = nullptr;
    call(ISGetIndices(parts.is, &p), "ISGetIndices");
    std::vector<std::uint64_t> out(p, p + n);
    call(ISRestoreIndices(parts.is, &p), "ISRestoreIndices");
    return out;
}

} // namespace

std::vector<std::uint64_t> graph_parts(MPI_Comm comm, const CsrView& csr,
                                       const Adjacency& adjacency) {
    int size = 1, rank = 0;
    MPI_Comm_size(comm, &size);
    MPI_Comm_rank(comm, &rank);
    // Every rank sees the same numbers, so every rank throws alike.
    std::uint64_t edges = adjacency.neighbours.size();
    MPI_Allreduce(MPI_IN_PLACE, &edges, 1, MPI_UINT64_T, MPI_MAX, comm);
    constexpr auto index_max = static_cast<std::uint64_t>(std::numeric_limits<PetscInt>::max());
    if (csr.states > index_max || edges > index_max)
        throw std::runtime_error("graph partitioning: the chain exceeds PETSc's index range");
    // PT-Scotch fails on fewer vertices than parts (seen with 2 states on 3
    // ranks); there is nothing to partition then anyway.
    if (csr.states < static_cast<std::uint64_t>(size))
        throw std::runtime_error("graph partitioning: fewer states than ranks");

    std::vector<std::uint64_t> weight(csr.rows.size());
    for (std::size_t i = 0; i < weight.size(); ++i)
        weight[i] = csr.offsets[i + 1] - csr.offsets[i] + 1;
    int empty = csr.rows.empty() ? 1 : 0;
    MPI_Allreduce(MPI_IN_PLACE, &empty, 1, MPI_INT, MPI_LOR, comm);
    if (!empty)
        return scotch_parts(comm, csr.states, adjacency, weight);

    // PT-Scotch also fails when a rank holds no vertex (a contiguous split
    // around one huge row can leave one so). Hand it the graph in even blocks,
    // which keep every index (parts in index order), and bring the parts back.
    std::vector<std::uint64_t> even_part(csr.rows.size());
    for (std::uint64_t i = 0; i < csr.rows.size(); ++i) {
        // even_rows' split: the first `extra` ranks hold base + 1 rows each.
        const std::uint64_t row = csr.rows.begin + i, parts = static_cast<std::uint64_t>(size);
        const std::uint64_t base = csr.states / parts, extra = csr.states % parts;
        even_part[i] =
            row < extra * (base + 1) ? row / (base + 1) : extra + (row - extra * (base + 1)) / base;
    }
    const Redistribution even(comm, csr.rows, even_part);
    const CsrView graph{csr.states, adjacency.rows, adjacency.offsets, adjacency.neighbours};
    const std::vector<double> no_weights(adjacency.neighbours.size(), 0.0);
    const MovedRows moved = even.move(graph, no_weights);
    Adjacency balanced;
    balanced.rows = moved.rows;
    balanced.offsets = moved.offsets;
    balanced.neighbours = moved.targets;
    const auto balanced_weight = even.to_new_order<std::uint64_t>(weight);
    const auto parts = scotch_parts(comm, csr.states, balanced, balanced_weight);
    return even.to_file_order<std::uint64_t>(parts);
}

} // namespace longrun::partition

#include "quality.hpp"

#include "lookup.hpp"

#include <algorithm>

namespace longrun::partition {

std::vector<std::uint64_t> parts_in_place(MPI_Comm comm, RowRange rows) {
    int rank = 0;
    MPI_Comm_rank(comm, &rank);
    return std::vector<std::uint64_t>(rows.size(), static_cast<std::uint64_t>(rank));
}

Quality measure_quality(MPI_Comm comm, const CsrView& csr, const Adjacency& adjacency,
                        const std::vector<RowRange>& ranges, std::span<const std::uint64_t> part) {
    int size = 1;
    MPI_Comm_size(comm, &size);
    const auto parts = static_cast<std::size_t>(size);
    // Every target is a neighbour (or the row itself), so one lookup covers both.
    const std::vector<std::uint64_t> neighbour_part =
        look_up(comm, ranges, part, adjacency.neighbours);

    std::uint64_t cut_ends = 0, off_rank = 0;
    std::vector<std::uint64_t> off;
    std::vector<std::uint64_t> received(parts, 0), nonzeros(parts, 0);
    std::vector<std::uint64_t> seen(parts, ~std::uint64_t{0});
    for (std::uint64_t i = 0; i < csr.rows.size(); ++i) {
        const std::uint64_t p = part[i], self = csr.rows.begin + i;
        const auto first =
            adjacency.neighbours.begin() + static_cast<std::ptrdiff_t>(adjacency.offsets[i]);
        const auto last =
            adjacency.neighbours.begin() + static_cast<std::ptrdiff_t>(adjacency.offsets[i + 1]);
        for (auto it = first; it != last; ++it)
            cut_ends +=
                neighbour_part[static_cast<std::size_t>(it - adjacency.neighbours.begin())] != p;
        nonzeros[p] += csr.offsets[i + 1] - csr.offsets[i] + 1;
        // x_self is sent once to each other part holding one of its targets.
        off.clear();
        for (std::uint64_t k = csr.offsets[i]; k < csr.offsets[i + 1]; ++k) {
            const std::uint64_t j = csr.targets[k];
            if (j == self)
                continue;
            const auto at = std::lower_bound(first, last, j);
            const std::uint64_t q =
                neighbour_part[static_cast<std::size_t>(at - adjacency.neighbours.begin())];
            if (q != p)
                off.push_back(j);
            if (q != p && seen[q] != self) {
                seen[q] = self;
                ++received[q];
            }
        }
        std::sort(off.begin(), off.end());
        off_rank += static_cast<std::uint64_t>(std::unique(off.begin(), off.end()) - off.begin());
    }
    std::uint64_t cut_total = 0;
    MPI_Allreduce(&cut_ends, &cut_total, 1, MPI_UINT64_T, MPI_SUM, comm);
    MPI_Allreduce(MPI_IN_PLACE, &off_rank, 1, MPI_UINT64_T, MPI_SUM, comm);
    MPI_Allreduce(MPI_IN_PLACE, received.data(), size, MPI_UINT64_T, MPI_SUM, comm);
    MPI_Allreduce(MPI_IN_PLACE, nonzeros.data(), size, MPI_UINT64_T, MPI_SUM, comm);

    Quality q;
    q.edge_cut = cut_total / 2; // each cut edge is seen from both of its ends
    q.off_rank_nonzeros = off_rank;
    for (std::uint64_t r : received)
        q.volume += r;
    q.max_volume = *std::max_element(received.begin(), received.end());
    std::uint64_t total = 0;
    for (std::uint64_t z : nonzeros)
        total += z;
    q.max_nonzeros = *std::max_element(nonzeros.begin(), nonzeros.end());
    q.imbalance = total == 0 ? 1.0 : double(q.max_nonzeros) * double(size) / double(total);
    return q;
}

} // namespace longrun::partition

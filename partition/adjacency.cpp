#include "adjacency.hpp"

#include "agreement.hpp"
#include "lookup.hpp"

#include <algorithm>
#include <stdexcept>
#include <utility>

namespace longrun::partition {

Adjacency symmetrised_adjacency(MPI_Comm comm, const CsrView& csr,
                                const std::vector<RowRange>& ranges) {
    int size = 1;
    MPI_Comm_size(comm, &size);
    // (target, source) pairs for the rank holding the target.
    std::vector<std::vector<std::uint64_t>> outgoing(static_cast<std::size_t>(size));
    bool targets_owned = true;
    try {
        for (std::uint64_t i = 0; i < csr.rows.size(); ++i)
            for (std::uint64_t k = csr.offsets[i]; k < csr.offsets[i + 1]; ++k) {
                const std::uint64_t j = csr.targets[k], source = csr.rows.begin + i;
                if (j == source)
                    continue;
                auto& bucket = outgoing[static_cast<std::size_t>(owner_of(ranges, j))];
                bucket.push_back(j);
                bucket.push_back(source);
            }
    } catch (const std::out_of_range&) {
        targets_owned = false;
    }
    agree_or_throw(comm, targets_owned,
                   "symmetrised adjacency: a transition points outside every rank's rows");
    std::vector<int> send_counts(static_cast<std::size_t>(size)),
        receive_counts(static_cast<std::size_t>(size));
    std::vector<std::uint64_t> flat;
    for (std::size_t r = 0; r < outgoing.size(); ++r) {
        send_counts[r] = static_cast<int>(outgoing[r].size());
        flat.insert(flat.end(), outgoing[r].begin(), outgoing[r].end());
        std::vector<std::uint64_t>().swap(outgoing[r]);
    }
    MPI_Alltoall(send_counts.data(), 1, MPI_INT, receive_counts.data(), 1, MPI_INT, comm);
    std::vector<int> send_displs(send_counts.size(), 0), receive_displs(send_counts.size(), 0);
    for (std::size_t r = 1; r < send_counts.size(); ++r) {
        send_displs[r] = send_displs[r - 1] + send_counts[r - 1];
        receive_displs[r] = receive_displs[r - 1] + receive_counts[r - 1];
    }
    std::vector<std::uint64_t> incoming(
        static_cast<std::size_t>(receive_displs.back() + receive_counts.back()));
    MPI_Alltoallv(flat.data(), send_counts.data(), send_displs.data(), MPI_UINT64_T,
                  incoming.data(), receive_counts.data(), receive_displs.data(), MPI_UINT64_T,
                  comm);
    std::vector<std::uint64_t>().swap(flat);

    // Merge each row's own targets with the sources that point at it.
    const std::uint64_t n = csr.rows.size();
    std::vector<std::uint64_t> reverse_count(n + 1, 0);
    for (std::size_t p = 0; p < incoming.size(); p += 2)
        ++reverse_count[incoming[p] - csr.rows.begin + 1];
    for (std::uint64_t i = 0; i < n; ++i)
        reverse_count[i + 1] += reverse_count[i];
    std::vector<std::uint64_t> reverse(incoming.size() / 2);
    {
        std::vector<std::uint64_t> fill(reverse_count.begin(), reverse_count.end() - 1);
        for (std::size_t p = 0; p < incoming.size(); p += 2)
            reverse[fill[incoming[p] - csr.rows.begin]++] = incoming[p + 1];
    }
    std::vector<std::uint64_t>().swap(incoming);

    Adjacency adj;
    adj.rows = csr.rows;
    adj.offsets.reserve(n + 1);
    adj.neighbours.reserve(csr.targets.size() + reverse.size());
    std::vector<std::uint64_t> row;
    for (std::uint64_t i = 0; i < n; ++i) {
        row.assign(csr.targets.begin() + static_cast<std::ptrdiff_t>(csr.offsets[i]),
                   csr.targets.begin() + static_cast<std::ptrdiff_t>(csr.offsets[i + 1]));
        row.insert(row.end(), reverse.begin() + static_cast<std::ptrdiff_t>(reverse_count[i]),
                   reverse.begin() + static_cast<std::ptrdiff_t>(reverse_count[i + 1]));
        std::sort(row.begin(), row.end());
        row.erase(std::unique(row.begin(), row.end()), row.end());
        for (std::uint64_t j : row)
            if (j != csr.rows.begin + i)
                adj.neighbours.push_back(j);
        adj.offsets.push_back(adj.neighbours.size());
    }
    return adj;
}

} // namespace longrun::partition

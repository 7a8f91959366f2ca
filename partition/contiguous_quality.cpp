#include "contiguous_quality.hpp"

#include "agreement.hpp"
#include "lookup.hpp"

#include <algorithm>
#include <stdexcept>

namespace longrun::partition {

namespace {

std::vector<int> displacements(const std::vector<int>& counts) {
    std::vector<int> d(counts.size(), 0);
    for (std::size_t i = 1; i < counts.size(); ++i)
        d[i] = d[i - 1] + counts[i - 1];
    return d;
}

// How many of the asked (target j, source i) transitions have their reverse
// j -> i among this rank's rows. Rows need not be sorted, so each row asked
// about is sorted once in a copy.
std::uint64_t reverse_present(const CsrView& csr, std::vector<std::uint64_t>& asked) {
    // Pairs sit flat as (j, i); sorting them as pairs groups the questions by row.
    const std::size_t pairs = asked.size() / 2;
    std::vector<std::size_t> order(pairs);
    for (std::size_t p = 0; p < pairs; ++p)
        order[p] = p;
    std::sort(order.begin(), order.end(),
              [&](std::size_t a, std::size_t b) { return asked[2 * a] < asked[2 * b]; });
    std::uint64_t found = 0;
    std::vector<std::uint64_t> row;
    for (std::size_t p = 0; p < pairs;) {
        const std::uint64_t j = asked[2 * order[p]], local = j - csr.rows.begin;
        row.assign(csr.targets.begin() + static_cast<std::ptrdiff_t>(csr.offsets[local]),
                   csr.targets.begin() + static_cast<std::ptrdiff_t>(csr.offsets[local + 1]));
        std::sort(row.begin(), row.end());
        for (; p < pairs && asked[2 * order[p]] == j; ++p)
            found += std::binary_search(row.begin(), row.end(), asked[2 * order[p] + 1]) ? 1 : 0;
    }
    return found;
}

std::vector<std::uint64_t> flatten(std::vector<std::vector<std::uint64_t>>& buckets,
                                   std::vector<int>& counts) {
    std::vector<std::uint64_t> flat;
    counts.assign(buckets.size(), 0);
    for (std::size_t q = 0; q < buckets.size(); ++q) {
        counts[q] = static_cast<int>(buckets[q].size());
        flat.insert(flat.end(), buckets[q].begin(), buckets[q].end());
        std::vector<std::uint64_t>().swap(buckets[q]);
    }
    return flat;
}

// The distinct off-rank targets of local row i, sorted, into `off`.
void off_rank_targets(const CsrView& csr, std::uint64_t i, std::vector<std::uint64_t>& off) {
    off.clear();
    for (std::uint64_t k = csr.offsets[i]; k < csr.offsets[i + 1]; ++k)
        if (!csr.rows.contains(csr.targets[k]))
            off.push_back(csr.targets[k]);
    std::sort(off.begin(), off.end());
    off.erase(std::unique(off.begin(), off.end()), off.end());
}

} // namespace

Quality contiguous_quality(MPI_Comm comm, const CsrView& csr, const std::vector<RowRange>& ranges) {
    int size = 1;
    MPI_Comm_size(comm, &size);
    const auto parts = static_cast<std::size_t>(size);

    // The one pass: per row, its distinct off-rank targets. Each is one
    // off-diagonal nonzero of A (duplicates are summed on assembly); each distinct
    // owner among them receives x of this row once per product.
    std::vector<std::uint64_t> received(parts, 0);
    std::vector<std::uint64_t> seen(parts, ~std::uint64_t{0});
    std::uint64_t off_rank = 0;
    bool targets_owned = true;
    std::vector<std::uint64_t> off;
    try {
        for (std::uint64_t i = 0; i < csr.rows.size(); ++i) {
            off_rank_targets(csr, i, off);
            off_rank += off.size();
            const std::uint64_t source = csr.rows.begin + i;
            for (std::uint64_t j : off) {
                const auto q = static_cast<std::size_t>(owner_of(ranges, j));
                if (seen[q] != source) {
                    seen[q] = source;
                    ++received[q];
                }
            }
        }
    } catch (const std::out_of_range&) {
        targets_owned = false;
    }
    agree_or_throw(comm, targets_owned,
                   "partition quality: a transition points outside every rank's rows");

    // Each rank learns what it receives; a reduce-scatter keeps this O(ranks)
    // per rank instead of a whole per-rank table everywhere.
    std::uint64_t my_received = 0;
    MPI_Reduce_scatter_block(received.data(), &my_received, 1, MPI_UINT64_T, MPI_SUM, comm);
    const std::uint64_t my_nonzeros = csr.targets.size() + csr.rows.size();
    std::uint64_t sums[3] = {my_received, off_rank, my_nonzeros};
    std::uint64_t maxima[2] = {my_received, my_nonzeros};
    MPI_Allreduce(MPI_IN_PLACE, sums, 3, MPI_UINT64_T, MPI_SUM, comm);
    MPI_Allreduce(MPI_IN_PLACE, maxima, 2, MPI_UINT64_T, MPI_MAX, comm);

    Quality q;
    q.volume = sums[0];
    q.off_rank_nonzeros = sums[1];
    q.max_volume = maxima[0];
    q.max_nonzeros = maxima[1];
    q.imbalance = sums[2] == 0 ? 1.0 : double(q.max_nonzeros) * double(size) / double(sums[2]);
    return q;
}

std::uint64_t contiguous_edge_cut(MPI_Comm comm, const CsrView& csr,
                                  const std::vector<RowRange>& ranges) {
    int size = 1;
    MPI_Comm_size(comm, &size);
    const auto parts = static_cast<std::size_t>(size);
    // Cut = |S| - (pairs of S whose reverse is in S) / 2, with S the distinct
    // off-rank transitions, since a pair {i, j} joined both ways is in S twice.
    // The owner of j is asked whether j -> i is there.
    std::vector<std::vector<std::uint64_t>> questions(parts);
    std::uint64_t off_rank = 0;
    bool targets_owned = true;
    std::vector<std::uint64_t> off;
    try {
        for (std::uint64_t i = 0; i < csr.rows.size(); ++i) {
            off_rank_targets(csr, i, off);
            off_rank += off.size();
            for (std::uint64_t j : off) {
                auto& bucket = questions[static_cast<std::size_t>(owner_of(ranges, j))];
                bucket.push_back(j);
                bucket.push_back(csr.rows.begin + i);
            }
        }
    } catch (const std::out_of_range&) {
        targets_owned = false;
    }
    agree_or_throw(comm, targets_owned,
                   "partition edge cut: a transition points outside every rank's rows");
    std::vector<int> send_counts, receive_counts(parts, 0);
    std::vector<std::uint64_t> flat = flatten(questions, send_counts);
    MPI_Alltoall(send_counts.data(), 1, MPI_INT, receive_counts.data(), 1, MPI_INT, comm);
    const auto send_displs = displacements(send_counts);
    const auto receive_displs = displacements(receive_counts);
    std::vector<std::uint64_t> asked(
        static_cast<std::size_t>(receive_displs.back() + receive_counts.back()));
    MPI_Alltoallv(flat.data(), send_counts.data(), send_displs.data(), MPI_UINT64_T, asked.data(),
                  receive_counts.data(), receive_displs.data(), MPI_UINT64_T, comm);
    std::vector<std::uint64_t>().swap(flat);
    std::uint64_t sums[2] = {off_rank, reverse_present(csr, asked)};
    MPI_Allreduce(MPI_IN_PLACE, sums, 2, MPI_UINT64_T, MPI_SUM, comm);
    return sums[0] - sums[1] / 2;
}

std::uint64_t edge_cut_in_place(MPI_Comm comm, const Adjacency& adjacency) {
    std::uint64_t ends = 0;
    for (std::uint64_t j : adjacency.neighbours)
        ends += adjacency.rows.contains(j) ? 0 : 1;
    MPI_Allreduce(MPI_IN_PLACE, &ends, 1, MPI_UINT64_T, MPI_SUM, comm);
    return ends / 2; // each cut edge is seen from both of its ends
}

} // namespace longrun::partition

#include "contiguous.hpp"

#include <algorithm>
#include <limits>

namespace longrun::partition {

RowRange even_rows(std::uint64_t states, int parts, int index) {
    const auto p = static_cast<std::uint64_t>(parts);
    const auto i = static_cast<std::uint64_t>(index);
    const std::uint64_t base = states / p, extra = states % p;
    const std::uint64_t begin = i * base + std::min(i, extra);
    return {begin, begin + base + (i < extra ? 1 : 0)};
}

RowRange balance_by_nonzeros(MPI_Comm comm, RowRange even,
                             const std::vector<std::uint64_t>& offsets_slice, std::uint64_t states,
                             std::uint64_t transitions) {
    int size = 1, rank = 0;
    MPI_Comm_size(comm, &size);
    MPI_Comm_rank(comm, &rank);
    if (size == 1)
        return {0, states};
    // cost(r) = offsets[r] + r is non-decreasing in r for a valid row pointer.
    // The offsets are not validated yet, so arithmetic is done in double: a
    // bogus huge offset gives a poor split, never an overflow.
    auto cost = [&](std::uint64_t r) {
        return static_cast<double>(offsets_slice[r - even.begin]) + static_cast<double>(r);
    };
    const double total = static_cast<double>(transitions) + static_cast<double>(states);
    constexpr auto none = std::numeric_limits<std::uint64_t>::max();
    std::vector<std::uint64_t> candidate(static_cast<std::size_t>(size - 1), none);
    for (int k = 1; k < size; ++k) {
        const double target = total * k / size;
        // Smallest r in [even.begin, even.end] with cost(r) >= target.
        std::uint64_t lo = even.begin, hi = even.end + 1;
        while (lo < hi) {
            const std::uint64_t mid = lo + (hi - lo) / 2;
            if (cost(mid) >= target)
                hi = mid;
            else
                lo = mid + 1;
        }
        if (lo <= even.end)
            candidate[k - 1] = lo;
    }
    std::vector<std::uint64_t> split(candidate.size());
    MPI_Allreduce(candidate.data(), split.data(), static_cast<int>(split.size()), MPI_UINT64_T,
                  MPI_MIN, comm);
    std::uint64_t previous = 0;
    for (auto& s : split) {
        s = std::clamp(s == none ? states : s, previous, states);
        previous = s;
    }
    const std::uint64_t begin = rank == 0 ? 0 : split[rank - 1];
    const std::uint64_t end = rank == size - 1 ? states : split[rank];
    return {begin, end};
}

std::vector<RowRange> gather_ranges(MPI_Comm comm, RowRange mine) {
    int size = 1;
    MPI_Comm_size(comm, &size);
    std::vector<std::uint64_t> flat(2 * static_cast<std::size_t>(size));
    std::uint64_t pair[2] = {mine.begin, mine.end};
    MPI_Allgather(pair, 2, MPI_UINT64_T, flat.data(), 2, MPI_UINT64_T, comm);
    std::vector<RowRange> out;
    std::uint64_t covered = 0;
    for (int r = 0; r < size; ++r) {
        RowRange range{flat[2 * r], flat[2 * r + 1]};
        if (range.empty())
            range = {covered, covered};
        else
            covered = range.end;
        out.push_back(range);
    }
    return out;
}

bool ranges_cover_in_order(const std::vector<RowRange>& ranges, std::uint64_t states) {
    std::uint64_t next = 0;
    for (const RowRange& range : ranges) {
        if (range.empty())
            continue;
        if (range.begin != next || range.end < range.begin)
            return false;
        next = range.end;
    }
    return next == states;
}

} // namespace longrun::partition

#include "lookup.hpp"

#include "agreement.hpp"

#include <algorithm>
#include <stdexcept>

namespace longrun::partition {

int owner_of(const std::vector<RowRange>& ranges, std::uint64_t row) {
    // Empty ranges sit between others with begin == end; upper_bound on begin
    // skips them and lands on the one range that contains the row.
    auto it =
        std::upper_bound(ranges.begin(), ranges.end(), row,
                         [](std::uint64_t r, const RowRange& range) { return r < range.begin; });
    while (it != ranges.begin() && !(it - 1)->contains(row))
        --it;
    if (it == ranges.begin())
        throw std::out_of_range("row outside every rank's range");
    return static_cast<int>(it - ranges.begin() - 1);
}

namespace {

std::vector<int> displacements(const std::vector<int>& counts) {
    std::vector<int> d(counts.size(), 0);
    for (std::size_t i = 1; i < counts.size(); ++i)
        d[i] = d[i - 1] + counts[i - 1];
    return d;
}

} // namespace

std::vector<std::uint64_t> look_up(MPI_Comm comm, const std::vector<RowRange>& ranges,
                                   std::span<const std::uint64_t> mine,
                                   std::span<const std::uint64_t> keys) {
    int size = 1, rank = 0;
    MPI_Comm_size(comm, &size);
    MPI_Comm_rank(comm, &rank);
    const RowRange own = ranges[static_cast<std::size_t>(rank)];
    // Ask each owner once per distinct row; sorted keys come out grouped by owner.
    std::vector<std::uint64_t> wanted(keys.begin(), keys.end());
    std::sort(wanted.begin(), wanted.end());
    wanted.erase(std::unique(wanted.begin(), wanted.end()), wanted.end());
    std::vector<int> send_counts(static_cast<std::size_t>(size), 0);
    bool keys_owned = true;
    try {
        for (std::uint64_t k : wanted)
            ++send_counts[static_cast<std::size_t>(owner_of(ranges, k))];
    } catch (const std::out_of_range&) {
        keys_owned = false;
    }
    agree_or_throw(comm, keys_owned, "lookup: a row outside every rank's rows");
    std::vector<int> receive_counts(static_cast<std::size_t>(size), 0);
    MPI_Alltoall(send_counts.data(), 1, MPI_INT, receive_counts.data(), 1, MPI_INT, comm);
    const auto send_displs = displacements(send_counts);
    const auto receive_displs = displacements(receive_counts);
    std::vector<std::uint64_t> asked(
        static_cast<std::size_t>(receive_displs.back() + receive_counts.back()));
    MPI_Alltoallv(wanted.data(), send_counts.data(), send_displs.data(), MPI_UINT64_T, asked.data(),
                  receive_counts.data(), receive_displs.data(), MPI_UINT64_T, comm);
    for (auto& a : asked)
        a = mine[a - own.begin];
    std::vector<std::uint64_t> answers(wanted.size());
    MPI_Alltoallv(asked.data(), receive_counts.data(), receive_displs.data(), MPI_UINT64_T,
                  answers.data(), send_counts.data(), send_displs.data(), MPI_UINT64_T, comm);
    std::vector<std::uint64_t> out(keys.size());
    for (std::size_t i = 0; i < keys.size(); ++i)
        out[i] = answers[static_cast<std::size_t>(
            std::lower_bound(wanted.begin(), wanted.end(), keys[i]) - wanted.begin())];
    return out;
}

} // namespace longrun::partition

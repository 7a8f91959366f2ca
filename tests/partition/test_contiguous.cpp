// Contiguous ownership balanced by nonzeros, computed from each rank's even slice
// of the row pointer only.
#include "partition/contiguous.hpp"

#include <gtest/gtest.h>
#include <mpi.h>

#include <numeric>
#include <vector>

namespace longrun {
namespace {

// Every rank calls this with the same row pointer; each passes only its even slice.
std::vector<RowRange> balanced_ranges(const std::vector<std::uint64_t>& offsets) {
    int rank = 0, size = 1;
    MPI_Comm_rank(MPI_COMM_WORLD, &rank);
    MPI_Comm_size(MPI_COMM_WORLD, &size);
    const std::uint64_t states = offsets.size() - 1;
    const RowRange even = partition::even_rows(states, size, rank);
    const std::vector<std::uint64_t> slice(offsets.begin() + even.begin,
                                           offsets.begin() + even.end + 1);
    const RowRange mine =
        partition::balance_by_nonzeros(MPI_COMM_WORLD, even, slice, states, offsets.back());
    return partition::gather_ranges(MPI_COMM_WORLD, mine);
}

void expect_cover(const std::vector<RowRange>& ranges, std::uint64_t states) {
    std::uint64_t next = 0;
    for (const auto& r : ranges) {
        EXPECT_EQ(r.begin, next);
        EXPECT_LE(r.begin, r.end);
        next = r.end;
    }
    EXPECT_EQ(next, states);
}

TEST(EvenRows, SplitsRemainderOverTheFirstRanks) {
    EXPECT_EQ(partition::even_rows(10, 3, 0), (RowRange{0, 4}));
    EXPECT_EQ(partition::even_rows(10, 3, 1), (RowRange{4, 7}));
    EXPECT_EQ(partition::even_rows(10, 3, 2), (RowRange{7, 10}));
    EXPECT_EQ(partition::even_rows(1, 3, 2), (RowRange{1, 1}));
}

TEST(BalanceByNonzeros, UniformRowsGiveEvenRanges) {
    std::vector<std::uint64_t> offsets(301);
    for (std::size_t i = 0; i < offsets.size(); ++i)
        offsets[i] = 4 * i;
    const auto ranges = balanced_ranges(offsets);
    expect_cover(ranges, 300);
    for (const auto& r : ranges)
        EXPECT_NEAR(double(r.size()), 300.0 / ranges.size(), 1.0);
}

TEST(BalanceByNonzeros, HeavyRowsAtTheStartGetFewerRowsPerRank) {
    // Rows 0..9 carry 1000 transitions each, the other 990 rows one each.
    std::vector<std::uint64_t> offsets{0};
    for (int i = 0; i < 1000; ++i)
        offsets.push_back(offsets.back() + (i < 10 ? 1000 : 1));
    const auto ranges = balanced_ranges(offsets);
    expect_cover(ranges, 1000);
    if (ranges.size() > 1) {
        EXPECT_LT(ranges.front().size(), ranges.back().size());
    }
    // Cost per rank (transitions + rows) within one heavy row of the mean.
    const double total = double(offsets.back()) + 1000.0;
    for (const auto& r : ranges) {
        const double cost = double(offsets[r.end] - offsets[r.begin]) + double(r.size());
        EXPECT_LE(cost, total / ranges.size() + 1001.0);
    }
}

TEST(BalanceByNonzeros, OneHugeRowCanLeaveRanksWithoutRows) {
    // Two states; state 0 has all the transitions. With 3 ranks someone gets none,
    // and the ranges must still cover every state exactly once.
    const std::vector<std::uint64_t> offsets{0, 1000000, 1000001};
    const auto ranges = balanced_ranges(offsets);
    expect_cover(ranges, 2);
    if (ranges.size() == 3) {
        int empty = 0;
        for (const auto& r : ranges)
            empty += r.empty() ? 1 : 0;
        EXPECT_GE(empty, 1);
    }
}

TEST(BalanceByNonzeros, MoreRanksThanStates) {
    const std::vector<std::uint64_t> offsets{0, 2};
    expect_cover(balanced_ranges(offsets), 1);
}

} // namespace
} // namespace longrun

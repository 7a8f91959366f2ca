// The variable-length gather to all ranks, on 1, 2 and 3 ranks: every rank gets
// every rank's items in rank order, also when some rank (or every rank) gives
// nothing. The expected sequences follow the definition of MPI_Allgatherv in the
// MPI standard (chapter "Collective Communication", "Gather-to-all"): rank r's
// items land after those of ranks 0 .. r-1, unchanged.
#include "io/mpi_gather.hpp"

#include <gtest/gtest.h>
#include <mpi.h>

#include <cstdint>
#include <vector>

namespace longrun {
namespace {

int world_rank() {
    int r = 0;
    MPI_Comm_rank(MPI_COMM_WORLD, &r);
    return r;
}

int world_size() {
    int s = 1;
    MPI_Comm_size(MPI_COMM_WORLD, &s);
    return s;
}

// Rank r gives r items (rank 0 nothing), valued 100 r + k.
std::vector<double> items_of(int r) {
    std::vector<double> v;
    for (int k = 0; k < r; ++k)
        v.push_back(100.0 * r + k + 0.5);
    return v;
}

TEST(GatherToAll, RankOrderWithAnEmptyRank) {
    const std::vector<double> mine = items_of(world_rank());
    const std::vector<double> all = gather_to_all<double>(MPI_COMM_WORLD, mine);
    std::vector<double> expected;
    for (int r = 0; r < world_size(); ++r)
        for (double x : items_of(r))
            expected.push_back(x);
    EXPECT_EQ(all, expected); // on one rank: nothing at all to gather
}

TEST(GatherToAll, EveryRankEmpty) {
    const std::vector<double> none;
    const auto runs = gather_runs_to_all<double>(MPI_COMM_WORLD, none);
    EXPECT_TRUE(runs.items.empty());
    EXPECT_EQ(runs.offsets,
              std::vector<std::size_t>(static_cast<std::size_t>(world_size()) + 1, 0));
}

// Padding inside and at the end: items travel whole, sizeof(T) bytes each.
struct Candidate {
    std::uint64_t index;
    double probability;
    std::uint8_t tag;
};
static_assert(sizeof(Candidate) > sizeof(std::uint64_t) + sizeof(double) + sizeof(std::uint8_t));

// Rank 1 gives nothing; rank r otherwise gives r + 2 candidates.
std::vector<Candidate> candidates_of(int r) {
    std::vector<Candidate> v;
    const int n = r == 1 ? 0 : r + 2;
    for (int k = 0; k < n; ++k)
        v.push_back({std::uint64_t(1000 * r + k), 1.0 / (r + k + 1), std::uint8_t(7 * r + k)});
    return v;
}

TEST(GatherToAll, StructItemsAndWhereEachRankStarts) {
    const auto runs = gather_runs_to_all<Candidate>(MPI_COMM_WORLD, candidates_of(world_rank()));
    std::vector<std::size_t> offsets{0};
    std::vector<Candidate> expected;
    for (int r = 0; r < world_size(); ++r) {
        for (const auto& c : candidates_of(r))
            expected.push_back(c);
        offsets.push_back(expected.size());
    }
    EXPECT_EQ(runs.offsets, offsets);
    ASSERT_EQ(runs.items.size(), expected.size());
    for (std::size_t i = 0; i < expected.size(); ++i) {
        EXPECT_EQ(runs.items[i].index, expected[i].index) << "item " << i;
        EXPECT_EQ(runs.items[i].probability, expected[i].probability) << "item " << i;
        EXPECT_EQ(runs.items[i].tag, expected[i].tag) << "item " << i;
    }
}

TEST(GatherToAll, OddByteRuns) {
    // 2 r + 1 bytes from rank r: runs that are not multiples of any word size.
    std::vector<std::uint8_t> mine;
    const int r = world_rank();
    for (int k = 0; k < 2 * r + 1; ++k)
        mine.push_back(std::uint8_t(16 * r + k));
    const auto runs = gather_runs_to_all<std::uint8_t>(MPI_COMM_WORLD, mine);
    std::vector<std::uint8_t> expected;
    std::vector<std::size_t> offsets{0};
    for (int q = 0; q < world_size(); ++q) {
        for (int k = 0; k < 2 * q + 1; ++k)
            expected.push_back(std::uint8_t(16 * q + k));
        offsets.push_back(expected.size());
    }
    EXPECT_EQ(runs.items, expected);
    EXPECT_EQ(runs.offsets, offsets);
}

} // namespace
} // namespace longrun

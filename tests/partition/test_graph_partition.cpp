// The graph partition's pieces on real ranks: quality numbers against small
// examples counted by hand (from the adjacency and straight from the rows), the partitioner against
// contiguous blocks on a scrambled lattice and on a lexicographic grid, and rows moved and back.
#include "../support/test_chains.hpp"
#include "partition/adjacency.hpp"
#include "partition/choice.hpp"
#include "partition/contiguous.hpp"
#include "partition/contiguous_quality.hpp"
#include "partition/graph_partition.hpp"
#include "partition/quality.hpp"
#include "partition/redistribution.hpp"

#include <gtest/gtest.h>
#include <mpi.h>

#include <algorithm>
#include <numeric>
#include <random>

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

// This rank's even slice of a whole chain that every rank built alike.
struct Slice {
    RowRange rows;
    std::vector<std::uint64_t> offsets{0}, targets;
    std::vector<double> weights;
    partition::CsrView view(std::uint64_t states) const { return {states, rows, offsets, targets}; }
};

Slice slice_of(const io::Chain& whole, RowRange rows) {
    Slice s;
    s.rows = rows;
    for (std::uint64_t i = rows.begin; i < rows.end; ++i) {
        for (std::uint64_t k = whole.offsets[i]; k < whole.offsets[i + 1]; ++k) {
            s.targets.push_back(whole.targets[k]);
            s.weights.push_back(whole.weights[k]);
        }
        s.offsets.push_back(s.targets.size());
    }
    return s;
}

struct Measured {
    partition::Quality contiguous, graph;
};

Measured measure_both(const io::Chain& whole) {
    const RowRange rows = partition::even_rows(whole.states, world_size(), world_rank());
    const Slice s = slice_of(whole, rows);
    const auto ranges = partition::gather_ranges(MPI_COMM_WORLD, rows);
    const auto adjacency =
        partition::symmetrised_adjacency(MPI_COMM_WORLD, s.view(whole.states), ranges);
    Measured m;
    m.contiguous =
        partition::measure_quality(MPI_COMM_WORLD, s.view(whole.states), adjacency, ranges,
                                   partition::parts_in_place(MPI_COMM_WORLD, rows));
    const auto parts = partition::graph_parts(MPI_COMM_WORLD, s.view(whole.states), adjacency);
    m.graph =
        partition::measure_quality(MPI_COMM_WORLD, s.view(whole.states), adjacency, ranges, parts);
    return m;
}

// Six states on a directed ring 0 -> 1 -> ... -> 5 -> 0 plus the chord 0 -> 3.
io::Chain ring_with_chord() {
    std::vector<std::uint64_t> from{0, 1, 2, 3, 4, 5, 0}, to{1, 2, 3, 4, 5, 0, 3};
    std::vector<double> w{0.5, 1, 1, 1, 1, 1, 0.5};
    return io::chain_from_triples(io::ChainKind::dtmc, 6, from, to, w);
}

partition::Quality ring_quality(bool modulo) {
    const io::Chain whole = ring_with_chord();
    const RowRange rows = partition::even_rows(6, world_size(), world_rank());
    const Slice s = slice_of(whole, rows);
    const auto ranges = partition::gather_ranges(MPI_COMM_WORLD, rows);
    const auto adjacency = partition::symmetrised_adjacency(MPI_COMM_WORLD, s.view(6), ranges);
    std::vector<std::uint64_t> part = partition::parts_in_place(MPI_COMM_WORLD, rows);
    if (modulo)
        for (std::uint64_t i = rows.begin; i < rows.end; ++i)
            part[i - rows.begin] = i % static_cast<std::uint64_t>(world_size());
    return partition::measure_quality(MPI_COMM_WORLD, s.view(6), adjacency, ranges, part);
}

// Expected values counted by hand from the definitions in partition/quality.hpp
// (7 undirected edges, 13 nonzeros: row 0 has 2 transitions + 1, the others 1 + 1).
TEST(Quality, RingWithChordInContiguousBlocks) {
    const auto q = ring_quality(false);
    switch (world_size()) {
    case 1:
        EXPECT_EQ(q.edge_cut, 0u);
        EXPECT_EQ(q.volume, 0u);
        EXPECT_DOUBLE_EQ(q.imbalance, 1.0);
        break;
    case 2: // {0,1,2} | {3,4,5}: cut {2,3} {5,0} {0,3}; rank 1 needs x0, x2; rank 0 x5
        EXPECT_EQ(q.edge_cut, 3u);
        EXPECT_EQ(q.volume, 3u);
        EXPECT_EQ(q.max_volume, 2u);
        EXPECT_EQ(q.max_nonzeros, 7u);
        EXPECT_DOUBLE_EQ(q.imbalance, 14.0 / 13.0);
        break;
    case 3: // {0,1} | {2,3} | {4,5}: cut {1,2} {3,4} {5,0} {0,3}; needs x5 | x0, x1 | x3
        EXPECT_EQ(q.edge_cut, 4u);
        EXPECT_EQ(q.volume, 4u);
        EXPECT_EQ(q.max_volume, 2u);
        EXPECT_EQ(q.max_nonzeros, 5u);
        EXPECT_DOUBLE_EQ(q.imbalance, 15.0 / 13.0);
        break;
    }
}

// The same numbers without the adjacency, plus the off-rank nonzeros (counted
// by hand: the transitions 2->3, 5->0, 0->3 cross on 2 ranks; 1->2, 3->4, 5->0,
// 0->3 on 3).
TEST(ContiguousQuality, RingWithChordCountedByHand) {
    const io::Chain whole = ring_with_chord();
    const RowRange rows = partition::even_rows(6, world_size(), world_rank());
    const Slice s = slice_of(whole, rows);
    const auto ranges = partition::gather_ranges(MPI_COMM_WORLD, rows);
    const auto q = partition::contiguous_quality(MPI_COMM_WORLD, s.view(6), ranges);
    const auto expected = ring_quality(false);
    EXPECT_EQ(partition::contiguous_edge_cut(MPI_COMM_WORLD, s.view(6), ranges), expected.edge_cut);
    EXPECT_EQ(q.volume, expected.volume);
    EXPECT_EQ(q.max_volume, expected.max_volume);
    EXPECT_EQ(q.max_nonzeros, expected.max_nonzeros);
    EXPECT_DOUBLE_EQ(q.imbalance, expected.imbalance);
    EXPECT_EQ(q.off_rank_nonzeros, expected.off_rank_nonzeros);
    const std::uint64_t off_by_hand[] = {0, 0, 3, 4};
    EXPECT_EQ(q.off_rank_nonzeros, off_by_hand[world_size()]);
}

// Transitions both ways between neighbours: each pair crossing a block border is
// one cut edge but two off-rank nonzeros. M/M/1/29 (30 states, counted by hand):
// 2 ranks {0..14} | {15..29}: cut {14,15}, x14 and x15 cross; 3 ranks {0..9} |
// {10..19} | {20..29}: cuts {9,10} and {19,20}, the middle rank receives x9, x20.
TEST(ContiguousQuality, BirthDeathBordersCountedByHand) {
    const io::Chain whole = testing_support::birth_death(1, 29, 1.0, 2.0);
    ASSERT_EQ(whole.states, 30u);
    const RowRange rows = partition::even_rows(30, world_size(), world_rank());
    const Slice s = slice_of(whole, rows);
    const auto ranges = partition::gather_ranges(MPI_COMM_WORLD, rows);
    const auto q = partition::contiguous_quality(MPI_COMM_WORLD, s.view(30), ranges);
    const std::uint64_t borders = static_cast<std::uint64_t>(world_size()) - 1;
    EXPECT_EQ(partition::contiguous_edge_cut(MPI_COMM_WORLD, s.view(30), ranges), borders);
    EXPECT_EQ(q.off_rank_nonzeros, 2 * borders);
    EXPECT_EQ(q.volume, 2 * borders);
    EXPECT_EQ(q.max_volume, std::min<std::uint64_t>(borders, 2));
}

// All rows on the last rank, the others holding empty ranges that start past the
// end (as rows forced per rank may): no rank may wait for another that threw.
TEST(ContiguousQuality, AllRowsOnTheLastRank) {
    const io::Chain whole = ring_with_chord();
    const RowRange rows = world_rank() == world_size() - 1 ? RowRange{0, 6} : RowRange{6, 6};
    const Slice s = slice_of(whole, rows);
    const auto ranges = partition::gather_ranges(MPI_COMM_WORLD, rows);
    EXPECT_TRUE(partition::ranges_cover_in_order(ranges, 6));
    const auto q = partition::contiguous_quality(MPI_COMM_WORLD, s.view(6), ranges);
    EXPECT_EQ(q.volume, 0u);
    EXPECT_EQ(partition::contiguous_edge_cut(MPI_COMM_WORLD, s.view(6), ranges), 0u);
    EXPECT_EQ(q.off_rank_nonzeros, 0u);
    EXPECT_EQ(q.max_nonzeros, 13u);
    EXPECT_DOUBLE_EQ(q.imbalance, double(world_size()));
    const auto adjacency = partition::symmetrised_adjacency(MPI_COMM_WORLD, s.view(6), ranges);
    std::uint64_t edges = adjacency.neighbours.size();
    MPI_Allreduce(MPI_IN_PLACE, &edges, 1, MPI_UINT64_T, MPI_SUM, MPI_COMM_WORLD);
    EXPECT_EQ(edges, 14u); // 7 undirected edges, each seen from both ends
    const auto parts = partition::graph_parts(MPI_COMM_WORLD, s.view(6), adjacency);
    const auto graph =
        partition::measure_quality(MPI_COMM_WORLD, s.view(6), adjacency, ranges, parts);
    EXPECT_LE(graph.edge_cut, 7u);
}

// A target outside the chain on one rank only: every rank throws, none hangs.
TEST(ContiguousQuality, BadTargetOnOneRankThrowsOnEveryRank) {
    const io::Chain whole = ring_with_chord();
    const RowRange rows = partition::even_rows(6, world_size(), world_rank());
    Slice s = slice_of(whole, rows);
    if (world_rank() == world_size() - 1)
        s.targets.back() = 9;
    const auto ranges = partition::gather_ranges(MPI_COMM_WORLD, rows);
    int threw = 0;
    try {
        (void)partition::contiguous_quality(MPI_COMM_WORLD, s.view(6), ranges);
    } catch (const std::runtime_error&) {
        threw += 1;
    }
    try {
        (void)partition::contiguous_edge_cut(MPI_COMM_WORLD, s.view(6), ranges);
    } catch (const std::runtime_error&) {
        threw += 1;
    }
    try {
        (void)partition::symmetrised_adjacency(MPI_COMM_WORLD, s.view(6), ranges);
    } catch (const std::runtime_error&) {
        threw += 1;
    }
    EXPECT_EQ(threw, 3);
}

TEST(ContiguousQuality, RangesOutOfRankOrderAreRecognised) {
    EXPECT_TRUE(partition::ranges_cover_in_order({{0, 0}, {0, 4}, {4, 4}, {4, 6}}, 6));
    EXPECT_FALSE(partition::ranges_cover_in_order({{3, 6}, {0, 3}}, 6));
    EXPECT_FALSE(partition::ranges_cover_in_order({{0, 3}, {4, 6}}, 6));
    EXPECT_FALSE(partition::ranges_cover_in_order({{0, 3}}, 6));
}

// Rows scattered (state i to rank i mod ranks), so every lookup crosses ranks.
TEST(Quality, RingWithChordScattered) {
    const auto q = ring_quality(true);
    switch (world_size()) {
    case 2: // {0,2,4} | {1,3,5}: all 7 edges cut; each side needs its 3 sources
        EXPECT_EQ(q.edge_cut, 7u);
        EXPECT_EQ(q.volume, 6u);
        EXPECT_EQ(q.max_volume, 3u);
        EXPECT_DOUBLE_EQ(q.imbalance, 14.0 / 13.0);
        break;
    case 3: // {0,3} | {1,4} | {2,5}: the ring's 6 edges cut, the chord not; 2 each
        EXPECT_EQ(q.edge_cut, 6u);
        EXPECT_EQ(q.volume, 6u);
        EXPECT_EQ(q.max_volume, 2u);
        EXPECT_DOUBLE_EQ(q.imbalance, 15.0 / 13.0);
        break;
    }
}

// A triangular lattice (aperiodic walk) whose node numbers are shuffled: file
// order says nothing about the geometry, as in a hashed or explored state space.
std::vector<std::pair<std::uint64_t, std::uint64_t>> scrambled_lattice(int side, std::uint64_t& n) {
    n = static_cast<std::uint64_t>(side) * side;
    std::vector<std::uint64_t> label(n);
    std::iota(label.begin(), label.end(), 0);
    std::mt19937_64 rng(7);
    std::shuffle(label.begin(), label.end(), rng);
    auto at = [&](int r, int c) { return label[static_cast<std::uint64_t>(r) * side + c]; };
    std::vector<std::pair<std::uint64_t, std::uint64_t>> edges;
    for (int r = 0; r < side; ++r)
        for (int c = 0; c < side; ++c) {
            if (c + 1 < side)
                edges.emplace_back(at(r, c), at(r, c + 1));
            if (r + 1 < side)
                edges.emplace_back(at(r, c), at(r + 1, c));
            if (r + 1 < side && c + 1 < side)
                edges.emplace_back(at(r, c), at(r + 1, c + 1));
        }
    return edges;
}

TEST(GraphPartition, ScrambledLatticeNeedsFarLessCommunication) {
    std::uint64_t n = 0;
    const auto edges = scrambled_lattice(40, n);
    const Measured m = measure_both(testing_support::graph_walk(n, edges));
    if (world_size() == 1) {
        EXPECT_EQ(m.graph.volume, 0u);
        return;
    }
    // A 40 x 40 lattice splits along a line of about 40 nodes; shuffled numbers
    // put about half of all 4,563 edges across contiguous blocks.
    EXPECT_LT(m.graph.volume * 4, m.contiguous.volume);
    EXPECT_LT(m.graph.edge_cut * 4, m.contiguous.edge_cut);
    EXPECT_LT(m.graph.imbalance, 1.1);
    EXPECT_TRUE(partition::graph_pays_off(m.contiguous, m.graph));
    EXPECT_TRUE(partition::communication_visible(m.contiguous));
}

TEST(GraphPartition, LexicographicGridKeepsContiguousBlocks) {
    // Contiguous blocks of a lexicographic grid already cut along a grid line,
    // and no partition into strips or patches does better by half.
    const Measured m = measure_both(testing_support::tandem(40, 25, 1.0, 1.2, 1.5));
    if (world_size() == 1)
        return;
    EXPECT_FALSE(partition::graph_pays_off(m.contiguous, m.graph));
    // About 25 entries per cut against 40 x 25 x 4 / ranks nonzeros (recounted
    // from the tandem's transitions): communication is still a visible share.
    EXPECT_TRUE(partition::communication_visible(m.contiguous));
    EXPECT_LE(m.contiguous.volume, 4u * 25u * static_cast<std::uint64_t>(world_size() - 1));
}

TEST(Redistribution, MovesRowsAndBringsValuesBack) {
    std::uint64_t n = 0;
    const auto edges = scrambled_lattice(12, n);
    const io::Chain whole = testing_support::graph_walk(n, edges);
    const RowRange rows = partition::even_rows(n, world_size(), world_rank());
    const Slice s = slice_of(whole, rows);
    const auto ranges = partition::gather_ranges(MPI_COMM_WORLD, rows);
    const auto adjacency = partition::symmetrised_adjacency(MPI_COMM_WORLD, s.view(n), ranges);
    const auto parts = partition::graph_parts(MPI_COMM_WORLD, s.view(n), adjacency);
    const partition::Redistribution moved(MPI_COMM_WORLD, rows, parts);
    const partition::MovedRows m = moved.move(s.view(n), s.weights);

    // Every old index's new one, on every rank, to check the moved CSR.
    std::vector<std::uint64_t> new_of(n, 0);
    for (std::uint64_t i = rows.begin; i < rows.end; ++i)
        new_of[i] = moved.new_index()[i - rows.begin];
    MPI_Allreduce(MPI_IN_PLACE, new_of.data(), static_cast<int>(n), MPI_UINT64_T, MPI_SUM,
                  MPI_COMM_WORLD);
    std::vector<std::uint64_t> sorted = new_of;
    std::sort(sorted.begin(), sorted.end());
    for (std::uint64_t i = 0; i < n; ++i)
        ASSERT_EQ(sorted[i], i); // a permutation
    std::vector<std::uint64_t> old_of(n);
    for (std::uint64_t i = 0; i < n; ++i)
        old_of[new_of[i]] = i;
    EXPECT_EQ(m.rows.size() + 1, m.offsets.size());
    for (std::uint64_t r = m.rows.begin; r < m.rows.end; ++r) {
        const std::uint64_t old = old_of[r];
        const std::uint64_t k0 = whole.offsets[old], k1 = whole.offsets[old + 1];
        const std::uint64_t m0 = m.offsets[r - m.rows.begin], m1 = m.offsets[r - m.rows.begin + 1];
        ASSERT_EQ(m1 - m0, k1 - k0);
        std::vector<std::pair<std::uint64_t, double>> expected;
        for (std::uint64_t k = k0; k < k1; ++k)
            expected.emplace_back(new_of[whole.targets[k]], whole.weights[k]);
        std::sort(expected.begin(), expected.end());
        for (std::uint64_t e = 0; e < expected.size(); ++e) {
            EXPECT_EQ(m.targets[m0 + e], expected[e].first);
            EXPECT_EQ(m.weights[m0 + e], expected[e].second);
        }
    }
    std::vector<double> file_values(rows.size());
    for (std::uint64_t i = rows.begin; i < rows.end; ++i)
        file_values[i - rows.begin] = static_cast<double>(i);
    const auto there = moved.to_new_order<double>(file_values);
    for (std::uint64_t r = m.rows.begin; r < m.rows.end; ++r)
        EXPECT_EQ(there[r - m.rows.begin], static_cast<double>(old_of[r]));
    EXPECT_EQ(moved.to_file_order<double>(there), file_values);
}

TEST(GraphPartition, RankWithoutRows) {
    // Rank 0 holds no rows before partitioning; every rank still takes part, and
    // the moved rows cover the chain once.
    const io::Chain whole = ring_with_chord();
    const RowRange rows = world_size() == 1 ? RowRange{0, 6}
                          : world_rank() == 0
                              ? RowRange{0, 0}
                              : partition::even_rows(6, world_size() - 1, world_rank() - 1);
    const Slice s = slice_of(whole, rows);
    const auto ranges = partition::gather_ranges(MPI_COMM_WORLD, rows);
    const auto adjacency = partition::symmetrised_adjacency(MPI_COMM_WORLD, s.view(6), ranges);
    const auto parts = partition::graph_parts(MPI_COMM_WORLD, s.view(6), adjacency);
    const auto q = partition::measure_quality(MPI_COMM_WORLD, s.view(6), adjacency, ranges, parts);
    EXPECT_LE(q.edge_cut, 7u);
    const partition::Redistribution moved(MPI_COMM_WORLD, rows, parts);
    const auto m = moved.move(s.view(6), s.weights);
    std::uint64_t total = m.rows.size();
    MPI_Allreduce(MPI_IN_PLACE, &total, 1, MPI_UINT64_T, MPI_SUM, MPI_COMM_WORLD);
    EXPECT_EQ(total, 6u);
}

TEST(GraphPartition, FewerStatesThanRanksIsRefusedOnEveryRank) {
    const io::Chain whole = testing_support::dense_dtmc({{0.5, 0.5}, {0.25, 0.75}});
    const RowRange rows = partition::even_rows(2, world_size(), world_rank());
    const Slice s = slice_of(whole, rows);
    const auto ranges = partition::gather_ranges(MPI_COMM_WORLD, rows);
    const auto adjacency = partition::symmetrised_adjacency(MPI_COMM_WORLD, s.view(2), ranges);
    int threw = 0;
    try {
        (void)partition::graph_parts(MPI_COMM_WORLD, s.view(2), adjacency);
    } catch (const std::runtime_error&) {
        threw = 1;
    }
    EXPECT_EQ(threw, world_size() > 2 ? 1 : 0);
}

// On a graph with no order at all, every number equals the adjacency-based one,
// also when one rank holds no rows and the others' ranges say nothing about it.
TEST(ContiguousQuality, AgreesWithTheAdjacencyOnAScrambledLattice) {
    std::uint64_t n = 0;
    const auto edges = scrambled_lattice(12, n);
    const io::Chain whole = testing_support::graph_walk(n, edges);
    for (const bool first_rank_empty : {false, true}) {
        const RowRange rows = !first_rank_empty || world_size() == 1
                                  ? partition::even_rows(n, world_size(), world_rank())
                              : world_rank() == 0
                                  ? RowRange{n, n}
                                  : partition::even_rows(n, world_size() - 1, world_rank() - 1);
        const Slice s = slice_of(whole, rows);
        const auto ranges = partition::gather_ranges(MPI_COMM_WORLD, rows);
        const auto cheap = partition::contiguous_quality(MPI_COMM_WORLD, s.view(n), ranges);
        const auto adjacency = partition::symmetrised_adjacency(MPI_COMM_WORLD, s.view(n), ranges);
        const auto full =
            partition::measure_quality(MPI_COMM_WORLD, s.view(n), adjacency, ranges,
                                       partition::parts_in_place(MPI_COMM_WORLD, rows));
        const auto cut = partition::contiguous_edge_cut(MPI_COMM_WORLD, s.view(n), ranges);
        EXPECT_EQ(cut, full.edge_cut);
        EXPECT_EQ(partition::edge_cut_in_place(MPI_COMM_WORLD, adjacency), full.edge_cut);
        EXPECT_EQ(cheap.volume, full.volume);
        EXPECT_EQ(cheap.max_volume, full.max_volume);
        EXPECT_EQ(cheap.off_rank_nonzeros, full.off_rank_nonzeros);
        EXPECT_EQ(cheap.max_nonzeros, full.max_nonzeros);
        EXPECT_DOUBLE_EQ(cheap.imbalance, full.imbalance);
        // An undirected walk has every transition both ways (common practice).
        EXPECT_EQ(cheap.off_rank_nonzeros, 2 * cut);
    }
}

} // namespace
} // namespace longrun

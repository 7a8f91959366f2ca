// Structure analysis (strongly connected components, closed classes, transient
// and absorbing states, periods) against textbook chains whose structure is known.
// Runs under mpirun with 1, 2 and 3 ranks, with balanced and forced partitions;
// analyse() is collective, so every rank calls it before anything is asserted.
#include "support/mpi_fixture.hpp"
#include "support/structure_chains.hpp"
#include "support/test_chains.hpp"

#include "analysis/structure.hpp"
#include "cli/load.hpp"
#include "cli/structure_report.hpp"

#include <numeric>

namespace longrun {
namespace {

using testing_support::MpiTest;
using Reps = std::vector<std::uint64_t>;

class StructureTest : public MpiTest {
  protected:
    analysis::Structure analyse(const io::Chain& chain, const std::string& name,
                                std::optional<RowRange> rows = std::nullopt,
                                bool want_class_of = false) {
        const auto path = write(chain, name);
        const auto loaded = cli::load_chain(path, MPI_COMM_WORLD, io::ValidationOptions{}, rows);
        return analysis::analyse(MPI_COMM_WORLD, cli::local_rows_of(loaded.chain), want_class_of);
    }

    // Rank 0 owns no rows, the others split them evenly.
    RowRange first_rank_empty(std::uint64_t n) const {
        if (rank == 0)
            return {0, 0};
        return {(rank - 1) * n / (size - 1), rank * n / (size - 1)};
    }
    // The second-last rank owns no rows and the last begins where it sits; the
    // others split the rows before. (Open MPI 4.1's collective MPI-IO once gave
    // the last rank wrong offsets here.) Needs 3 ranks.
    RowRange empty_before_last(std::uint64_t n) const {
        const std::uint64_t k = n / 2;
        if (rank == size - 1)
            return {k, n};
        if (rank == size - 2)
            return {k, k};
        return {rank * k / (size - 2), (rank + 1) * k / (size - 2)};
    }
    // The last rank owns every row.
    RowRange all_on_last(std::uint64_t n) const {
        return rank == size - 1 ? RowRange{0, n} : RowRange{n, n};
    }

    static Reps range(std::uint64_t from, std::uint64_t to) {
        Reps r(to - from);
        std::iota(r.begin(), r.end(), from);
        return r;
    }

    // Gambler's ruin on 0..10 (Grinstead & Snell, Introduction to Probability,
    // ch. 11): the absorbing states 0 and 10 are the only closed classes; 1..9 are
    // transient and communicate with each other, so they make one component.
    void expect_gamblers_ruin(const analysis::Structure& s) {
        EXPECT_EQ(s.states, 11u);
        EXPECT_FALSE(s.unique());
        ASSERT_EQ(s.closed.size(), 2u);
        for (const auto& c : s.closed) {
            EXPECT_EQ(c.size, 1u);
            EXPECT_TRUE(c.absorbing());
            EXPECT_EQ(c.period, 1u); // a self-loop
        }
        EXPECT_EQ(s.closed[0].representatives, Reps{0});
        EXPECT_EQ(s.closed[1].representatives, Reps{10});
        EXPECT_EQ(s.transient, 9u);
        EXPECT_EQ(s.transient_representatives, range(1, 10));
        EXPECT_EQ(s.components, 3u);
        EXPECT_EQ(s.largest_components, (Reps{9, 1, 1}));
        EXPECT_EQ(s.self_loops, 2u);
        EXPECT_EQ(s.edges, 18u);
        EXPECT_EQ(s.min_out_degree, 0u);
        EXPECT_EQ(s.max_out_degree, 2u);
    }

    // Two directed cycles, {0, 2, 4} and {1, 3, 5, 6}, interleaved so that each
    // spans ranks: two closed classes of periods 3 and 4 (a deterministic cycle of
    // length L returns only at multiples of L; period as the gcd of return times,
    // Norris, Markov Chains, sec. 1.8).
    static io::Chain two_cycles() {
        return testing_support::directed_cycles(7, {{0, 2, 4}, {1, 3, 5, 6}});
    }
    void expect_two_cycles(const analysis::Structure& s) {
        EXPECT_TRUE(!s.unique());
        ASSERT_EQ(s.closed.size(), 2u);
        EXPECT_EQ(s.closed[0].size, 3u);
        EXPECT_EQ(s.closed[0].period, 3u);
        EXPECT_EQ(s.closed[0].representatives, (Reps{0, 2, 4}));
        EXPECT_EQ(s.closed[1].size, 4u);
        EXPECT_EQ(s.closed[1].period, 4u);
        EXPECT_EQ(s.closed[1].representatives, (Reps{1, 3, 5, 6}));
        EXPECT_EQ(s.transient, 0u);
        EXPECT_EQ(s.components, 2u);
    }
};

TEST_F(StructureTest, GamblersRuinHasTwoAbsorbingStatesAndTransientMiddle) {
    const auto s = analyse(testing_support::gamblers_ruin(10, 0.4), "ruin.h5", std::nullopt, true);
    expect_gamblers_ruin(s);
    ASSERT_EQ(s.class_of.size(), 11u);
    EXPECT_EQ(s.class_of[0], 0u);
    EXPECT_EQ(s.class_of[10], 1u);
    for (std::uint64_t v = 1; v < 10; ++v)
        EXPECT_EQ(s.class_of[v], analysis::Structure::not_closed) << "state " << v;
}

TEST_F(StructureTest, EhrenfestUrnIsOneClassOfPeriodTwo) {
    // Feller, An Introduction to Probability Theory and Its Applications I,
    // ch. XV: the urn alternates between even and odd counts (period 2).
    const auto s = analyse(testing_support::ehrenfest(9), "ehrenfest.h5");
    EXPECT_TRUE(s.unique());
    ASSERT_EQ(s.closed.size(), 1u);
    EXPECT_EQ(s.closed[0].size, 10u);
    EXPECT_EQ(s.closed[0].period, 2u);
    EXPECT_FALSE(s.closed[0].absorbing());
    EXPECT_EQ(s.closed[0].representatives, range(0, 10));
    EXPECT_EQ(s.transient, 0u);
    EXPECT_EQ(s.components, 1u);
    EXPECT_EQ(s.self_loops, 0u);
}

TEST_F(StructureTest, WalkOnAnEvenCycleHasPeriodTwo) {
    // Levin, Peres & Wilmer, sec. 1.3 (recalled from memory): the walk on the
    // n-cycle is periodic exactly when n is even.
    const auto s = analyse(testing_support::cycle_walk(8), "cycle8.h5");
    ASSERT_EQ(s.closed.size(), 1u);
    EXPECT_EQ(s.closed[0].size, 8u);
    EXPECT_EQ(s.closed[0].period, 2u);
}

TEST_F(StructureTest, WalkOnAnOddCycleIsAperiodic) {
    const auto s = analyse(testing_support::cycle_walk(9), "cycle9.h5");
    ASSERT_EQ(s.closed.size(), 1u);
    EXPECT_EQ(s.closed[0].size, 9u);
    EXPECT_EQ(s.closed[0].period, 1u);
}

TEST_F(StructureTest, OneSelfLoopMakesTheEvenCycleAperiodic) {
    const auto s = analyse(testing_support::cycle_walk(8, 5), "cycle8-lazy.h5");
    ASSERT_EQ(s.closed.size(), 1u);
    EXPECT_EQ(s.closed[0].period, 1u);
    EXPECT_EQ(s.self_loops, 1u);
    EXPECT_EQ(s.edges, 16u); // the self-loop is not an edge
}

TEST_F(StructureTest, TwoDisjointCyclesAreTwoClassesWithTheirLengthsAsPeriods) {
    expect_two_cycles(analyse(two_cycles(), "cycles.h5"));
}

TEST_F(StructureTest, TransientStatesDoNotChangeAClosedClassPeriod) {
    // The two cycles again, plus 7 -> 1 and 8 -> 7 or 3: two transient singleton
    // components leading into the 4-cycle, whose period stays 4.
    const auto chain =
        io::chain_from_triples(io::ChainKind::dtmc, 9, {0, 2, 4, 1, 3, 5, 6, 7, 8, 8},
                               {2, 4, 0, 3, 5, 6, 1, 1, 7, 3}, {1, 1, 1, 1, 1, 1, 1, 1, .5, .5});
    const auto s = analyse(chain, "cycles-transient.h5");
    ASSERT_EQ(s.closed.size(), 2u);
    EXPECT_EQ(s.closed[0].period, 3u);
    EXPECT_EQ(s.closed[1].period, 4u);
    EXPECT_EQ(s.transient, 2u);
    EXPECT_EQ(s.transient_representatives, (Reps{7, 8}));
    EXPECT_EQ(s.components, 4u);
}

TEST_F(StructureTest, CtmcPathIntoAnAbsorbingState) {
    // 0 -> 1 -> 2 -> 3 -> 4 at rate 1: one closed class, the absorbing state 4, so
    // the stationary law is unique (all mass on 4); every other state is transient.
    const auto s = analyse(testing_support::path_into_absorbing(5), "path.h5");
    EXPECT_TRUE(s.unique());
    ASSERT_EQ(s.closed.size(), 1u);
    EXPECT_TRUE(s.closed[0].absorbing());
    EXPECT_EQ(s.closed[0].representatives, Reps{4});
    EXPECT_EQ(s.closed[0].period, 0u); // a ctmc has no period
    EXPECT_EQ(s.transient, 4u);
    EXPECT_EQ(s.transient_representatives, range(0, 4));
    EXPECT_EQ(s.components, 5u);
    EXPECT_EQ(s.max_in_degree, 1u);
    EXPECT_EQ(s.min_out_degree, 0u);
}

TEST_F(StructureTest, SingleStateDtmc) {
    const auto s = analyse(testing_support::dense_dtmc({{1.0}}), "one.h5");
    EXPECT_TRUE(s.unique());
    ASSERT_EQ(s.closed.size(), 1u);
    EXPECT_TRUE(s.closed[0].absorbing());
    EXPECT_EQ(s.closed[0].period, 1u);
    EXPECT_EQ(s.components, 1u);
    EXPECT_EQ(s.edges, 0u);
    EXPECT_EQ(s.self_loops, 1u);
}

TEST_F(StructureTest, SingleStateCtmcWithoutTransitions) {
    const auto s = analyse(io::chain_from_triples(io::ChainKind::ctmc, 1, {}, {}, {}), "one-c.h5");
    EXPECT_TRUE(s.unique());
    ASSERT_EQ(s.closed.size(), 1u);
    EXPECT_TRUE(s.closed[0].absorbing());
    EXPECT_EQ(s.transient, 0u);
}

TEST_F(StructureTest, ZeroWeightsAreNotTransitions) {
    // 0 <-> 1 communicate; 1 -> 2 is stored with weight 0; 2 -> 0. Were the zero
    // a transition, all three states would form one class. As it is not, 2 is
    // reachable from nowhere: its own component, transient.
    const auto chain = io::chain_from_triples(io::ChainKind::dtmc, 3, {0, 1, 1, 1, 2},
                                              {1, 0, 1, 2, 0}, {1.0, 0.5, 0.5, 0.0, 1.0});
    const auto s = analyse(chain, "zero.h5");
    EXPECT_EQ(s.zero_weights, 1u);
    EXPECT_EQ(s.components, 2u);
    ASSERT_EQ(s.closed.size(), 1u);
    EXPECT_EQ(s.closed[0].representatives, (Reps{0, 1}));
    EXPECT_EQ(s.closed[0].period, 1u); // the self-loop at 1
    EXPECT_EQ(s.transient, 1u);
    EXPECT_EQ(s.transient_representatives, Reps{2});
    EXPECT_EQ(s.edges, 3u);
}

TEST_F(StructureTest, RanksWithoutRowsGiveTheSameStructure) {
    if (size < 2)
        GTEST_SKIP() << "needs at least 2 ranks";
    const auto ruin = testing_support::gamblers_ruin(10, 0.4);
    expect_gamblers_ruin(analyse(ruin, "ruin-first-empty.h5", first_rank_empty(11)));
    expect_gamblers_ruin(analyse(ruin, "ruin-all-last.h5", all_on_last(11)));
    expect_two_cycles(analyse(two_cycles(), "cycles-first-empty.h5", first_rank_empty(7)));
    const auto s = analyse(two_cycles(), "cycles-all-last.h5", all_on_last(7), true);
    expect_two_cycles(s);
    EXPECT_EQ(s.class_of, (std::vector<std::uint32_t>{0, 1, 0, 1, 0, 1, 1}));
    if (size >= 3) {
        expect_gamblers_ruin(analyse(ruin, "ruin-empty-before-last.h5", empty_before_last(11)));
        expect_two_cycles(
            analyse(two_cycles(), "cycles-empty-before-last.h5", empty_before_last(7)));
    }
}

} // namespace
} // namespace longrun

namespace longrun {
namespace {

// Blocks of `size` states on a ring each, joined into a ring of blocks by one
// transition of rate `coupling` from each block's last state to the next block.
io::Chain coupled_rings(int blocks, int size, double coupling) {
    std::vector<std::uint64_t> s, t;
    std::vector<double> w;
    for (int b = 0; b < blocks; ++b)
        for (int i = 0; i < size; ++i) {
            s.push_back(b * size + i);
            t.push_back(b * size + (i + 1) % size);
            w.push_back(1.0);
            if (i == size - 1) {
                s.push_back(b * size + i);
                t.push_back(((b + 1) % blocks) * size);
                w.push_back(coupling);
            }
        }
    return io::chain_from_triples(io::ChainKind::ctmc, std::uint64_t(blocks) * size, s, t, w);
}

// The definition of near decomposability used here (weak edges below 1e-3 of
// the state's largest weight) is our own heuristic; the chains make it obvious.
TEST_F(StructureTest, WeaklyCoupledRingsAreNearlyDecomposable) {
    const auto s = analyse(coupled_rings(6, 5, 1e-5), "rings.h5");
    EXPECT_EQ(s.weak_edges, 6u);
    EXPECT_EQ(s.strong_blocks, 6u);
    EXPECT_EQ(s.states_in_blocks, 30u);
    EXPECT_TRUE(s.nearly_decomposable());
    EXPECT_TRUE(s.unique());
}

TEST_F(StructureTest, EvenlyCoupledRingsAndTandemLinesAreNot) {
    const auto rings = analyse(coupled_rings(6, 5, 0.5), "rings.h5");
    EXPECT_EQ(rings.weak_edges, 0u);
    EXPECT_FALSE(rings.nearly_decomposable());
    const auto line = analyse(testing_support::tandem(8, 8, 1.0, 1.1, 1.2), "tandem.h5");
    EXPECT_FALSE(line.nearly_decomposable());
}

} // namespace
} // namespace longrun

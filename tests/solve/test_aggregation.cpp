// The `aggregation` method (multilevel aggregation-disaggregation) against values
// from outside the project: closed forms and GTH elimination. Runs under mpirun
// with 1, 2 and 3 ranks; each run is checked against the same rank-independent
// reference, so agreement across rank counts follows.
#include "support/mpi_fixture.hpp"
#include "support/test_chains.hpp"

#include "solve/gth.hpp"

#include <petscsys.h>

#include <cmath>

namespace longrun {
namespace {

class Aggregation : public testing_support::MpiTest {
  protected:
    // Solves with `aggregation` alone and checks that it, not a fallback, met the
    // certificate.
    std::vector<double> solve_by_aggregation(const std::string& path, double tol,
                                             std::optional<RowRange> rows = std::nullopt) {
        const auto report = solve(path, "aggregation", tol, rows);
        EXPECT_EQ(report.method, "aggregation");
        EXPECT_TRUE(report.certificate.meets(tol)) << "residual " << report.certificate.residual;
        return gather(report);
    }

    static std::vector<double> gth_reference(const io::Chain& chain) {
        solve::LocalRows rows{chain.kind == io::ChainKind::ctmc ? solve::TimeModel::continuous
                                                                : solve::TimeModel::discrete,
                              chain.states,
                              chain.rows,
                              chain.offsets,
                              chain.targets,
                              chain.weights};
        return solve::gth_stationary(rows);
    }
};

// An invented nearly completely decomposable ctmc: `blocks` blocks of `size`
// states; inside a block a two-way ring with rates of order 1, between blocks
// one jump per state to the next block (cyclically) at rates of order
// `coupling`. Decomposability in the sense of Courtois, "Decomposability:
// Queueing and Computer System Applications", Academic Press 1977.
io::Chain nearly_decomposable(int blocks, int size, double coupling) {
    std::vector<std::uint64_t> s, t;
    std::vector<double> w;
    auto id = [&](int b, int i) { return static_cast<std::uint64_t>(b) * size + i; };
    for (int b = 0; b < blocks; ++b)
        for (int i = 0; i < size; ++i) {
            s.push_back(id(b, i));
            t.push_back(id(b, (i + 1) % size));
            w.push_back(1.0 + 0.3 * ((i + b) % 4));
            s.push_back(id(b, i));
            t.push_back(id(b, (i + size - 1) % size));
            w.push_back(0.5 + 0.2 * (i % 3));
            s.push_back(id(b, i));
            t.push_back(id((b + 1) % blocks, (3 * i + b) % size));
            w.push_back(coupling * (1.0 + (i % 2)));
        }
    io::Chain chain = io::chain_from_triples(io::ChainKind::ctmc,
                                             static_cast<std::uint64_t>(blocks) * size, s, t, w);
    io::StateVariable block{"block", true, {}, 0.0, double(blocks - 1)};
    io::StateVariable within{"within", true, {}, 0.0, double(size - 1)};
    for (int b = 0; b < blocks; ++b)
        for (int i = 0; i < size; ++i) {
            block.values.push_back(b);
            within.values.push_back(i);
        }
    chain.variables = {block, within};
    return chain;
}

TEST_F(Aggregation, MMcKMatchesTheClosedForm) {
    // M/M/c/K closed form (Gross & Harris, Fundamentals of Queueing Theory).
    const int c = 3, K = 400;
    const double lambda = 2.5, mu = 1.0;
    const auto path = write(testing_support::birth_death(c, K, lambda, mu), "mmck.h5");
    const auto pi = solve_by_aggregation(path, 1e-12);
    EXPECT_LT(max_abs_difference(pi, testing_support::mmck_closed_form(c, K, lambda, mu)), 1e-10);
}

TEST_F(Aggregation, TandemLineWithStateVariablesAgreesWithGth) {
    const auto chain = testing_support::tandem(40, 36, 1.0, 1.3, 1.1);
    const auto path = write(chain, "tandem.h5");
    const auto pi = solve_by_aggregation(path, 1e-12);
    EXPECT_LT(max_abs_difference(pi, gth_reference(chain)), 1e-10);
}

TEST_F(Aggregation, TandemLineWithoutStateVariablesAgreesWithGth) {
    // No variables: the aggregates come from strong connections alone.
    auto chain = testing_support::tandem(40, 36, 1.0, 1.3, 1.1);
    chain.variables.clear();
    const auto path = write(chain, "tandem-bare.h5");
    const auto pi = solve_by_aggregation(path, 1e-12);
    EXPECT_LT(max_abs_difference(pi, gth_reference(chain)), 1e-10);
}

TEST_F(Aggregation, NearlyDecomposableChainAgreesWithGth) {
    const auto chain = nearly_decomposable(12, 60, 1e-4);
    for (const bool with_variables : {true, false}) {
        auto copy = chain;
        if (!with_variables)
            copy.variables.clear();
        const auto path = write(copy, with_variables ? "ncd.h5" : "ncd-bare.h5");
        // The stationary vector of an NCD chain is ill-conditioned (its
        // condition grows like 1/coupling), hence the tight certificate.
        const auto pi = solve_by_aggregation(path, 1e-12);
        EXPECT_LT(max_abs_difference(pi, gth_reference(chain)), 1e-10)
            << (with_variables ? "with" : "without") << " state variables";
    }
}

TEST_F(Aggregation, LandOfOzWeatherMatchesThePrintedFixedVector) {
    // Grinstead & Snell, Introduction to Probability, ch. 11 (Land of Oz):
    // fixed vector (2/5, 1/5, 2/5) (recalled from memory; it follows by hand from w P = w).
    const auto path =
        write(testing_support::dense_dtmc({{0.5, 0.25, 0.25}, {0.5, 0.0, 0.5}, {0.25, 0.25, 0.5}}),
              "oz.h5");
    const auto pi = solve_by_aggregation(path, 1e-12);
    EXPECT_LT(max_abs_difference(pi, {0.4, 0.2, 0.4}), 1e-12);
}

TEST_F(Aggregation, RandomWalkDtmcIsProportionalToDegree) {
    // pi(v) = deg(v) / 2|E| (Levin, Peres & Wilmer, Markov Chains and Mixing
    // Times, sec. 1.4). A ring of 600 with chords: a dtmc large enough for
    // several levels. The chords have odd length on an even ring, so the graph
    // is bipartite and the walk has period 2 (aggregation does not mind);
    // tests/solve/test_error_estimate.cpp has an aperiodic walk.
    std::vector<std::pair<std::uint64_t, std::uint64_t>> edges;
    const std::uint64_t n = 600;
    for (std::uint64_t v = 0; v < n; ++v)
        edges.emplace_back(v, (v + 1) % n);
    for (std::uint64_t v = 0; v < n; v += 7)
        edges.emplace_back(v, (v + 101) % n);
    auto chain = testing_support::graph_walk(n, edges);
    chain.variables.clear(); // "degree" is no coordinate of a grid
    const auto path = write(chain, "walk.h5");
    const auto pi = solve_by_aggregation(path, 1e-12);
    std::vector<double> expected(n, 0);
    for (auto [a, b] : edges) {
        expected[a] += 1.0 / (2.0 * edges.size());
        expected[b] += 1.0 / (2.0 * edges.size());
    }
    EXPECT_LT(max_abs_difference(pi, expected), 1e-10);
}

TEST_F(Aggregation, RankWithoutRowsTakesPartAndGivesTheSameAnswer) {
    if (size < 2)
        GTEST_SKIP() << "needs at least 2 ranks";
    const auto chain = testing_support::tandem(30, 20, 1.0, 1.4, 1.2);
    const auto path = write(chain, "tandem-empty-rank.h5");
    const std::uint64_t n = chain.states;
    const std::uint64_t per = n / (size - 1);
    const std::uint64_t begin = std::min<std::uint64_t>(rank * per, n);
    const RowRange rows =
        rank == size - 1 ? RowRange{n, n} : RowRange{begin, rank == size - 2 ? n : begin + per};
    const auto pi = solve_by_aggregation(path, 1e-12, rows);
    EXPECT_LT(max_abs_difference(pi, gth_reference(chain)), 1e-10);
}

TEST_F(Aggregation, VCyclesAndStrengthGroupingReachTheSameAnswer) {
    // Every knob stays reachable through the options database.
    const auto chain = testing_support::tandem(30, 30, 1.0, 1.2, 1.5);
    const auto path = write(chain, "tandem-v.h5");
    PetscOptionsSetValue(nullptr, "-aggregation_cycle", "v");
    PetscOptionsSetValue(nullptr, "-aggregation_grouping", "strength");
    PetscOptionsSetValue(nullptr, "-aggregation_pre_sweeps", "2");
    const auto pi = solve_by_aggregation(path, 1e-12);
    PetscOptionsClearValue(nullptr, "-aggregation_cycle");
    PetscOptionsClearValue(nullptr, "-aggregation_grouping");
    PetscOptionsClearValue(nullptr, "-aggregation_pre_sweeps");
    EXPECT_LT(max_abs_difference(pi, gth_reference(chain)), 1e-10);
}

} // namespace
} // namespace longrun

// Stationary distributions against values from outside the project. Runs under
// mpirun with 1, 2 and 3 ranks; every check is reduced so that all ranks agree.
#include "support/mpi_fixture.hpp"
#include "support/test_chains.hpp"

#include "solve/gth.hpp"

#include <cmath>

namespace longrun {
namespace {

using testing_support::MpiTest;

class StationaryByMethod : public MpiTest, public ::testing::WithParamInterface<std::string> {};

TEST_P(StationaryByMethod, MM1KMatchesTheGeometricClosedForm) {
    // M/M/1/K: p_n = (1 - rho) rho^n / (1 - rho^(K+1)) (Gross & Harris,
    // Fundamentals of Queueing Theory, M/M/1/K).
    const int K = 30;
    const double lambda = 0.9, mu = 1.0, rho = lambda / mu;
    const auto path = write(testing_support::birth_death(1, K, lambda, mu), "mm1k.h5");
    const auto report = solve(path, GetParam(), 1e-12);
    const auto pi = gather(report);
    ASSERT_EQ(pi.size(), std::size_t(K + 1));
    for (int n = 0; n <= K; ++n) {
        const double expected = (1 - rho) * std::pow(rho, n) / (1 - std::pow(rho, K + 1));
        EXPECT_NEAR(pi[n], expected, 1e-12) << "state " << n;
    }
    // Mean number in system, same source: rho/(1-rho) - (K+1) rho^(K+1) / (1 - rho^(K+1)).
    const double mean =
        rho / (1 - rho) - (K + 1) * std::pow(rho, K + 1) / (1 - std::pow(rho, K + 1));
    ASSERT_EQ(report.variables.size(), 1u);
    EXPECT_NEAR(report.variables[0].mean, mean, 1e-10);
}

TEST_P(StationaryByMethod, MMcKMatchesTheClosedForm) {
    const int c = 3, K = 15;
    const double lambda = 2.5, mu = 1.0;
    const auto path = write(testing_support::birth_death(c, K, lambda, mu), "mmck.h5");
    const auto pi = gather(solve(path, GetParam(), 1e-12));
    const auto expected = testing_support::mmck_closed_form(c, K, lambda, mu);
    EXPECT_LT(max_abs_difference(pi, expected), 1e-12);
}

TEST_P(StationaryByMethod, LandOfOzWeatherMatchesThePrintedFixedVector) {
    // Rain, Nice, Snow. Grinstead & Snell, Introduction to Probability, ch. 11
    // (the Land of Oz example); printed fixed vector w = (.4, .2, .4) (recalled
    // from memory; it also follows by hand from w P = w).
    const auto path =
        write(testing_support::dense_dtmc({{0.5, 0.25, 0.25}, {0.5, 0.0, 0.5}, {0.25, 0.25, 0.5}}),
              "oz.h5");
    const auto pi = gather(solve(path, GetParam(), 1e-12));
    EXPECT_LT(max_abs_difference(pi, {0.4, 0.2, 0.4}), 1e-13);
}

TEST_P(StationaryByMethod, RandomWalkOnAGraphIsProportionalToDegree) {
    // pi(v) = deg(v) / 2|E| (Levin, Peres & Wilmer, Markov Chains and Mixing
    // Times, sec. 1.4, random walks on graphs). A ring of 40 with chords, so the
    // degrees differ. Chords of odd length 17 join even and odd nodes: the graph
    // stays bipartite and the walk has period 2. Chords of even length 16 close
    // a cycle of 17 edges: not bipartite, so the walk is aperiodic.
    for (const std::uint64_t chord : {17, 16}) {
        const auto edges = testing_support::ring_with_chords(40, 3, chord);
        const auto path = write(testing_support::graph_walk(40, edges), "walk.h5");
        const auto pi = gather(solve(path, GetParam(), 1e-12));
        const auto expected = testing_support::degree_law(40, edges);
        EXPECT_LT(max_abs_difference(pi, expected), 1e-12) << "chords of length " << chord;
    }
}

TEST_P(StationaryByMethod, EhrenfestUrnIsBinomialDespitePeriodTwo) {
    // Ehrenfest urn with N balls: from k, to k-1 with prob k/N, to k+1 with
    // (N-k)/N; period 2, stationary law Binomial(N, 1/2) (Feller, An
    // Introduction to Probability Theory and Its Applications I, ch. XV).
    const int N = 12;
    std::vector<std::vector<double>> p(N + 1, std::vector<double>(N + 1, 0));
    for (int k = 0; k <= N; ++k) {
        if (k > 0)
            p[k][k - 1] = double(k) / N;
        if (k < N)
            p[k][k + 1] = double(N - k) / N;
    }
    const auto path = write(testing_support::dense_dtmc(p), "ehrenfest.h5");
    const auto pi = gather(solve(path, GetParam(), 1e-12));
    std::vector<double> expected(N + 1);
    for (int k = 0; k <= N; ++k)
        expected[k] = std::exp(std::lgamma(N + 1) - std::lgamma(k + 1) - std::lgamma(N - k + 1) -
                               N * std::log(2.0));
    EXPECT_LT(max_abs_difference(pi, expected), 1e-12);
}

TEST_P(StationaryByMethod, TandemLineAgreesWithGthElimination) {
    // GTH is exact up to rounding (no subtractions); the same answer on 1, 2 and
    // 3 ranks to 1e-12 follows from each run's agreement with it.
    const auto chain = testing_support::tandem(24, 30, 1.0, 1.3, 1.1);
    const auto path = write(chain, "tandem.h5");
    const auto pi = gather(solve(path, GetParam(), 1e-12));
    solve::LocalRows rows{solve::TimeModel::continuous,
                          chain.states,
                          chain.rows,
                          chain.offsets,
                          chain.targets,
                          chain.weights};
    const auto reference = solve::gth_stationary(rows);
    EXPECT_LT(max_abs_difference(pi, reference), 5e-13);
}

INSTANTIATE_TEST_SUITE_P(Methods, StationaryByMethod, ::testing::Values("linear", "eigen", "auto"));

class ErlangLoss : public MpiTest {};

TEST_F(ErlangLoss, BlockingMatchesThePublishedTableRowForTenServers) {
    // Erlang B tables list, for 10 servers at 1 % blocking, an offered load of
    // 4.46 erlangs (standard traffic tables; value recalled from memory). The
    // table rounds the load to 0.01 erlang, worth about 1e-4 in blocking here.
    const int servers = 10;
    const double erlangs = 4.46;
    const auto path =
        write(testing_support::birth_death(servers, servers, erlangs, 1.0), "erlang.h5");
    const auto pi = gather(solve(path, "auto", 1e-12));
    EXPECT_NEAR(pi.back(), 0.01, 1e-4);
    // And exactly against the formula's recursion.
    EXPECT_NEAR(pi.back(), testing_support::erlang_b(servers, erlangs), 1e-13);
}

class Partitions : public MpiTest {};

TEST_F(Partitions, RanksWithoutRowsStillTakePartAndGiveTheSameAnswer) {
    if (size < 2)
        GTEST_SKIP() << "needs at least 2 ranks";
    const auto chain = testing_support::tandem(12, 10, 1.0, 1.4, 1.2);
    const auto path = write(chain, "tandem-empty-rank.h5");
    // All rows on the ranks but the last; the last has none.
    const std::uint64_t n = chain.states;
    const std::uint64_t per = n / (size - 1);
    const std::uint64_t begin = std::min<std::uint64_t>(rank * per, n);
    const std::uint64_t end = rank == size - 1 ? n : (rank == size - 2 ? n : begin + per);
    const RowRange rows = rank == size - 1 ? RowRange{n, n} : RowRange{begin, end};
    const auto balanced = gather(solve(path, "linear", 1e-12));
    const auto report = solve(path, "linear", 1e-12, rows);
    const auto skewed = gather(report);
    EXPECT_EQ(report.rows, rows);
    EXPECT_LT(max_abs_difference(balanced, skewed), 1e-12);
    const auto eigen = gather(solve(path, "eigen", 1e-12, rows));
    EXPECT_LT(max_abs_difference(balanced, eigen), 1e-12);
}

TEST_F(Partitions, FirstRankWithoutRowsWorksToo) {
    if (size < 2)
        GTEST_SKIP() << "needs at least 2 ranks";
    const auto chain = testing_support::birth_death(2, 40, 1.5, 1.0);
    const auto path = write(chain, "bd-empty-first.h5");
    const std::uint64_t n = chain.states;
    const RowRange rows =
        rank == 0 ? RowRange{0, 0} : RowRange{(rank - 1) * n / (size - 1), rank * n / (size - 1)};
    const auto pi = gather(solve(path, "auto", 1e-12, rows));
    EXPECT_LT(max_abs_difference(pi, testing_support::mmck_closed_form(2, 40, 1.5, 1.0)), 1e-12);
}

} // namespace
} // namespace longrun

namespace longrun {
namespace {

class Truncation : public testing_support::MpiTest {};

TEST_F(Truncation, MassAtTheUpperBoundOfAnMM1KIsTheClosedFormAndWarnsOnlyWhenLarge) {
    // P(N = K) for M/M/1/K is (1 - rho) rho^K / (1 - rho^(K+1)) (Gross & Harris).
    for (const auto& [K, rho, warn] : {std::tuple{12, 0.8, true}, std::tuple{80, 0.5, false}}) {
        const auto path =
            write(testing_support::birth_death(1, K, rho, 1.0), "cut" + std::to_string(K) + ".h5");
        const auto report = solve(path, "auto", 1e-12);
        const double expected = (1 - rho) * std::pow(rho, K) / (1 - std::pow(rho, K + 1));
        ASSERT_EQ(report.truncation.size(), 2u); // lower and upper bound of n
        const auto& lower = report.truncation[0];
        const auto& upper = report.truncation[1];
        EXPECT_FALSE(lower.upper);
        EXPECT_FALSE(lower.warn) << "a lower bound of 0 is natural, not a cut";
        EXPECT_TRUE(upper.upper);
        // Relative: at K = 80 the mass is 4e-25, and any absolute tolerance above
        // that could not fail. gth (auto's choice at this size) is entrywise
        // accurate, so 1e-9 of the value is a fair demand.
        EXPECT_NEAR(upper.mass, expected, 1e-9 * expected);
        EXPECT_EQ(upper.warn, warn) << "K = " << K;
    }
}

} // namespace
} // namespace longrun

namespace longrun {
namespace {

class TinyChains : public testing_support::MpiTest {};

TEST_F(TinyChains, ThreeStateCycleSolvesOnEveryRankCount) {
    // Regression: hypre's exact coarsest-level solve met the singular system on one
    // rank only and left the others waiting. Rates 2 forward and 1 back around a
    // 3-cycle: by symmetry every state has probability 1/3.
    std::vector<std::uint64_t> s{0, 0, 1, 1, 2, 2}, t{1, 2, 0, 2, 0, 1};
    std::vector<double> w{2, 1, 1, 2, 2, 1};
    const auto path = write(io::chain_from_triples(io::ChainKind::ctmc, 3, s, t, w), "cyc3.h5");
    for (const char* method : {"auto", "linear"}) {
        const auto pi = gather(solve(path, method, 1e-12));
        EXPECT_LT(max_abs_difference(pi, {1.0 / 3, 1.0 / 3, 1.0 / 3}), 1e-13) << method;
    }
}

} // namespace
} // namespace longrun

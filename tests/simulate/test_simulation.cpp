// The simulation core against closed forms, with fixed seeds.
//
// How the run lengths keep these tests from flaking: for each checked quantity
// the asymptotic variance sigma^2 of its time average is known (a closed form,
// or scipy's solution of the Poisson equation, both named below), so the
// interval's half-width should be close to z * sigma / sqrt(run length). Each
// test checks (a) that the half-width lies within [0.6, 1.6] times that value
// (a batch-means half-width with a ~ sqrt(n) >= 500 batches has a relative
// standard deviation near 1 / sqrt(2 a) <= 3.2 %, so both bounds are over 10
// standard deviations away) and (b) that the estimate is within 4 half-widths
// of the closed form: with an honest half-width that is |error| > 7.8 standard
// deviations, probability below 1e-14 under the normal limit. The run lengths
// are chosen so that the half-widths are a small fraction of the value (about
// 1 %) and each test runs well under a second.
#include "simulate/batch_means.hpp"
#include "simulate/simulation.hpp"
#include "support/test_chains.hpp"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <set>

using namespace longrun;
using namespace longrun::simulate;

namespace {

const Estimate& find(const ReplicationResult& r, const std::string& name) {
    for (const auto& e : r.estimates)
        if (e.name == name)
            return e;
    throw std::runtime_error("no estimate named " + name);
}

SimulationSettings by_time(double time, std::uint64_t seed = 7, double warmup = 0) {
    SimulationSettings s;
    s.length.time = time;
    s.length.warmup = warmup;
    s.seed = seed;
    return s;
}

SimulationSettings by_steps(std::uint64_t steps, std::uint64_t seed = 7, double warmup = 0) {
    SimulationSettings s;
    s.length.steps = steps;
    s.length.warmup = warmup;
    s.seed = seed;
    return s;
}

// (a) and (b) of the header comment. `sigma2` is the asymptotic variance of the
// time average: run length * Var(mean) -> sigma2.
void expect_consistent(const Estimate& e, double exact, double sigma2, double run_length) {
    const double expected_half_width = 1.959963984540054 * std::sqrt(sigma2 / run_length);
    EXPECT_GT(e.half_width, 0.6 * expected_half_width) << e.name;
    EXPECT_LT(e.half_width, 1.6 * expected_half_width) << e.name;
    EXPECT_NEAR(e.mean, exact, 4 * e.half_width) << e.name;
}

// M/M/1/K with labelled transitions: "arrival" n -> n+1, "service" n -> n-1 and
// "lost", an arrival at a full queue (a self-loop at K with rate lambda).
io::Chain mm1k_labelled(int K, double lambda, double mu) {
    io::Chain c;
    c.kind = io::ChainKind::ctmc;
    c.states = K + 1;
    c.rows = {0, c.states};
    c.event_names = {"arrival", "service", "lost"};
    io::StateVariable n{"n", true, {}, 0.0, double(K)};
    for (int i = 0; i <= K; ++i) {
        if (i > 0) {
            c.targets.push_back(i - 1);
            c.weights.push_back(mu);
            c.events.push_back(1);
        }
        c.targets.push_back(i < K ? i + 1 : i);
        c.weights.push_back(lambda);
        c.events.push_back(i < K ? 0 : 2);
        c.offsets.push_back(c.targets.size());
        n.values.push_back(i);
    }
    c.transitions = c.targets.size();
    c.variables.push_back(n);
    return c;
}

// Ehrenfest urn with N balls as a dtmc: k balls in the first urn, a ball picked
// uniformly changes urn. Stationary law Binomial(N, 1/2); period 2.
io::Chain ehrenfest(int N) {
    std::vector<std::vector<double>> p(N + 1, std::vector<double>(N + 1, 0.0));
    for (int k = 0; k <= N; ++k) {
        if (k > 0)
            p[k][k - 1] = double(k) / N;
        if (k < N)
            p[k][k + 1] = double(N - k) / N;
    }
    io::Chain c = testing_support::dense_dtmc(p);
    io::StateVariable v{"k", true, {}, 0.0, double(N)};
    io::Measure sq{"squared_deviation", {}};
    for (int k = 0; k <= N; ++k) {
        v.values.push_back(k);
        sq.values.push_back((k - N / 2.0) * (k - N / 2.0));
    }
    c.variables.push_back(v);
    c.measures.push_back(sq);
    return c;
}

} // namespace

// M/M/1/K, lambda 0.8, mu 1, K 5. Closed form: p_n = p_0 rho^n (Gross & Harris,
// Fundamentals of Queueing Theory, the M/M/1/K model; mmck_closed_form).
// Asymptotic variances by scipy (python3-scipy): g from Q g = -(f - pi f) with
// pi g = 0 (scipy.linalg.lstsq), sigma^2 = 2 sum_i pi_i (f_i - pi f) g_i:
// 20.951693361001922 for f = n, 0.3151974352436007 for f = 1{n = K}.
TEST(SimulateCtmc, MM1KOccupancyAndFullProbability) {
    const int K = 5;
    const double lambda = 0.8, mu = 1.0, T = 2e5;
    io::Chain chain = testing_support::birth_death(1, K, lambda, mu);
    io::Measure full{"full", std::vector<double>(K + 1, 0.0)};
    full.values[K] = 1;
    chain.measures.push_back(full);
    const auto p = testing_support::mmck_closed_form(1, K, lambda, mu);
    double mean = 0;
    for (int n = 0; n <= K; ++n)
        mean += n * p[n];

    const auto r = run_replication(chain, by_time(T, 11, 100.0), 0);
    EXPECT_FALSE(r.absorbed_in.has_value());
    EXPECT_EQ(r.simulated, T);
    ASSERT_EQ(r.estimates.size(), 2u);
    EXPECT_EQ(r.estimates[0].kind, "variable");
    EXPECT_EQ(r.estimates[1].kind, "measure");
    expect_consistent(find(r, "n"), mean, 20.951693361001922, T);
    expect_consistent(find(r, "full"), p[K], 0.3151974352436007, T);
}

// Loss rate lambda * P(N = K) (Gross & Harris, as above) two ways on the same
// path (same chain structure, same seed): the time average of the loss
// intensity lambda * 1{n = K}, and counted firings of the labelled self-loop.
// Given the path, the firings are Poisson at rate lambda while n = K, so the
// count's asymptotic variance is lambda^2 sigma^2_{1{K}} + lambda p_K
// (0.27278195748035594) against lambda^2 sigma^2_{1{K}} (0.2017263585559045)
// for the intensity (scipy, as above): the intensity's interval is narrower.
TEST(SimulateCtmc, LossRateFromIntensitiesAndFromLabels) {
    const int K = 5;
    const double lambda = 0.8, mu = 1.0, T = 2e5;
    const auto p = testing_support::mmck_closed_form(1, K, lambda, mu);
    const double loss = lambda * p[K];

    const io::Chain labelled = mm1k_labelled(K, lambda, mu);
    io::Chain with_intensity = labelled;
    io::Measure intensity{"lost", std::vector<double>(K + 1, 0.0)};
    intensity.values[K] = lambda;
    with_intensity.event_intensities.push_back(intensity);

    const auto from_labels = run_replication(labelled, by_time(T, 5), 0);
    const auto from_intensity = run_replication(with_intensity, by_time(T, 5), 0);
    // Same structure and stream: the very same path.
    EXPECT_EQ(from_labels.transitions, from_intensity.transitions);
    EXPECT_EQ(find(from_labels, "n").mean, find(from_intensity, "n").mean);

    const Estimate& counted = find(from_labels, "lost");
    const Estimate& averaged = find(from_intensity, "lost");
    EXPECT_EQ(counted.kind, "event");
    EXPECT_EQ(averaged.kind, "event");
    expect_consistent(counted, loss, 0.27278195748035594, T);
    expect_consistent(averaged, loss, 0.2017263585559045, T);
    EXPECT_LT(averaged.half_width, counted.half_width);
    // Labels still estimate the events without intensities: arrivals admitted,
    // lambda (1 - p_K) (Gross & Harris); its width is not derived here.
    EXPECT_NEAR(find(from_intensity, "arrival").mean, lambda * (1 - p[K]),
                4 * find(from_intensity, "arrival").half_width);
    // The labelled "lost" is covered by the intensity: one estimate per name.
    EXPECT_EQ(std::count_if(from_intensity.estimates.begin(), from_intensity.estimates.end(),
                            [](const Estimate& e) { return e.name == "lost"; }),
              1);
}

// Ehrenfest urn, N = 10: stationary Binomial(10, 1/2), so E k = 5 and
// E (k - 5)^2 = N/4 = 2.5 (P. and T. Ehrenfest's urn model; M. Kac, "Random
// walk and the theory of Brownian motion", American Mathematical Monthly 54,
// 1947). The chain has period 2; time averages still converge. Asymptotic
// variances in closed form: f = k - N/2 satisfies E[f(X_1) | X_0] = (1 - 2/N)
// f(X_0), hence sigma^2 = Var(f) (1 + r)/(1 - r) with r = 1 - 2/N:
// (N/4)(N - 1) = 22.5; g = (k - N/2)^2 - N/4 has r = 1 - 4/N and Var g =
// N(N - 1)/8, hence sigma^2 = N(N - 1)(N - 2)/16 = 45 (derived here; scipy's
// fundamental-matrix solution gives 22.5 and 45.0 too).
TEST(SimulateDtmc, EhrenfestMeanAndVariance) {
    const int N = 10;
    const std::uint64_t steps = 1'000'000;
    const auto r = run_replication(ehrenfest(N), by_steps(steps, 3, 1000), 0);
    EXPECT_EQ(r.transitions, steps);
    EXPECT_EQ(r.simulated, double(steps));
    expect_consistent(find(r, "k"), N / 2.0, 22.5, double(steps));
    expect_consistent(find(r, "squared_deviation"), N / 4.0, 45.0, double(steps));
}

// A dtmc whose rows store no diagonal and sum to less than 1: the leftover is
// "stay". P = [[0.7, 0.3], [0.6, 0.4]]: pi_1 = 0.3 / (0.3 + 0.6) = 1/3 (two-state
// chain, common practice); sigma^2 of 1{state 1} = pi_0 pi_1 (1 + r)/(1 - r)
// with r = 1 - 0.3 - 0.6 = 0.1: 0.2716049382716... (scipy agrees).
TEST(SimulateDtmc, MissingDiagonalMeansStay) {
    io::Chain c = io::chain_from_triples(io::ChainKind::dtmc, 2, {0, 1}, {1, 0}, {0.3, 0.6});
    c.variables.push_back({"x", true, {0.0, 1.0}, {}, {}});
    const std::uint64_t steps = 1'000'000;
    const auto r = run_replication(c, by_steps(steps, 9), 0);
    expect_consistent(find(r, "x"), 1.0 / 3.0, 2.0 / 9.0 * 1.1 / 0.9, double(steps));
}

TEST(SimulateStreams, SameSeedSameBitsOtherIndexOtherPath) {
    const io::Chain chain = testing_support::birth_death(1, 5, 0.8, 1.0);
    const auto a = run_replication(chain, by_time(1e4, 42), 3);
    const auto b = run_replication(chain, by_time(1e4, 42), 3);
    const auto other_index = run_replication(chain, by_time(1e4, 42), 4);
    const auto other_seed = run_replication(chain, by_time(1e4, 43), 3);
    EXPECT_EQ(a.transitions, b.transitions);
    EXPECT_EQ(a.final_state, b.final_state);
    ASSERT_EQ(a.estimates.size(), b.estimates.size());
    for (std::size_t q = 0; q < a.estimates.size(); ++q) {
        EXPECT_EQ(a.estimates[q].mean, b.estimates[q].mean); // bit for bit
        EXPECT_EQ(a.estimates[q].half_width, b.estimates[q].half_width);
    }
    EXPECT_NE(a.estimates[0].mean, other_index.estimates[0].mean);
    EXPECT_NE(a.estimates[0].mean, other_seed.estimates[0].mean);
    EXPECT_EQ(other_index.index, 4u);
}

// Flegal & Jones' consistent batch means: about sqrt(n) batches of about sqrt(n)
// transitions. The merges halve the count, so it lands within a factor sqrt(2)
// of sqrt(n); checked within a factor 2, for every way a run length is given.
TEST(SimulateBatches, CountGrowsLikeSquareRootOfRunLength) {
    const io::Chain ctmc = testing_support::birth_death(1, 5, 0.8, 1.0);
    std::vector<ReplicationResult> runs = {
        run_replication(ctmc, by_time(1e3), 0), run_replication(ctmc, by_time(1e5), 0),
        run_replication(ctmc, by_steps(50'000), 0), // unknown time: the store doubles batches
        run_replication(ehrenfest(10), by_steps(10'000), 0),
        run_replication(ehrenfest(10), by_steps(4'000'000), 0)};
    for (const auto& r : runs) {
        const Estimate& e = r.estimates.front();
        const double root = std::sqrt(double(r.transitions));
        EXPECT_GE(double(e.batches), root / 2) << r.transitions;
        EXPECT_LE(double(e.batches), root * 2) << r.transitions;
        // The batches cover the run but for at most one batch's worth.
        EXPECT_LE(double(e.batches) * e.batch_size, r.simulated * (1 + 1e-9));
        EXPECT_GE(double(e.batches + 1) * e.batch_size, r.simulated * (1 - 1e-9));
    }
}

TEST(SimulateBatches, MergesKeepTheSums) {
    // 64 unit steps with values 1, 3, 1, 3, ... into a store of 16 batches of
    // initial length 1: the store doubles the length twice, to 4.
    BatchMeans b(1, 1.0, 16);
    double clock = 0;
    for (int step = 0; step < 64; ++step) {
        b.open()[0] += step % 2 == 0 ? 1.0 : 3.0;
        clock += 1;
        if (clock == b.batch_end() && step < 63)
            b.close_batch();
    }
    EXPECT_EQ(b.batch_length(), 4.0);
    // n = 256: sqrt(n) = 16 batches of 4, the last one the open batch.
    const auto iv = b.finish(clock, 256, 0.95);
    EXPECT_EQ(iv[0].mean, 2.0);
    EXPECT_EQ(iv[0].batches, 16u);
    EXPECT_EQ(iv[0].batch_size, 4.0);
    EXPECT_EQ(iv[0].half_width, 0.0); // every batch has mean 2
    // n = 16: about 4 batches, merged from the 16 (of 16 each).
    BatchMeans c(1, 1.0, 16);
    for (int step = 0; step < 16; ++step) {
        c.open()[0] += step < 8 ? 1.0 : 3.0;
        if (step < 15)
            c.close_batch();
    }
    const auto merged = c.finish(16.0, 16, 0.95);
    EXPECT_EQ(merged[0].batches, 4u);
    EXPECT_EQ(merged[0].batch_size, 4.0);
    EXPECT_EQ(merged[0].mean, 2.0);
    // Batch means 1, 1, 3, 3: sd 2 / sqrt(3), half-width t(0.975, 3) sd / 2
    // (t from scipy.stats.t.ppf: 3.182446305284263; Hill's algorithm to 1e-5).
    EXPECT_NEAR(merged[0].half_width, 3.182446305284263 * (2 / std::sqrt(3.0)) / 2, 1e-4);
    EXPECT_DOUBLE_EQ(merged[0].standard_error, (2 / std::sqrt(3.0)) / 2);
}

// Absorption: 0 -> 1 -> 2 at rate 1, state 2 has no way out. Then the path is
// held in 2 until the end.
TEST(SimulateAbsorption, CtmcStopsAndHolds) {
    io::Chain c = io::chain_from_triples(io::ChainKind::ctmc, 3, {0, 1}, {1, 2}, {1.0, 1.0});
    c.variables.push_back({"x", true, {0.0, 1.0, 2.0}, {}, {}});
    const double T = 1000;
    const auto r = run_replication(c, by_time(T, 1), 0);
    ASSERT_TRUE(r.absorbed_in.has_value());
    EXPECT_EQ(*r.absorbed_in, 2u);
    EXPECT_EQ(r.final_state, 2u);
    EXPECT_EQ(r.transitions, 2u);
    EXPECT_EQ(r.simulated, T);
    // The two holding times are Exp(1): their sum exceeds 40 with probability
    // 41 e^-40 < 2e-16 (Gamma(2, 1) tail), so the average is within 0.08 of 2.
    EXPECT_GT(find(r, "x").mean, 2 - 0.08);
    EXPECT_LE(find(r, "x").mean, 2.0);
}

TEST(SimulateAbsorption, DtmcSelfLoopOnlyAndEmptyRow) {
    // 0 -> 1 with probability 1; 1 only to itself.
    io::Chain loop = io::chain_from_triples(io::ChainKind::dtmc, 2, {0, 1}, {1, 1}, {1.0, 1.0});
    loop.variables.push_back({"x", true, {0.0, 1.0}, {}, {}});
    const auto r = run_replication(loop, by_steps(100), 0);
    ASSERT_TRUE(r.absorbed_in.has_value());
    EXPECT_EQ(*r.absorbed_in, 1u);
    EXPECT_EQ(r.transitions, 100u);
    // Step 0 in state 0, 99 in state 1; the batches cut steps into fractions,
    // hence rounding.
    EXPECT_NEAR(find(r, "x").mean, 0.99, 1e-12);

    // A row with no entries: all of it is the leftover, "stay".
    io::Chain empty = io::chain_from_triples(io::ChainKind::dtmc, 2, {0}, {1}, {1.0});
    empty.variables.push_back({"x", true, {5.0, 7.0}, {}, {}});
    SimulationSettings s = by_steps(10);
    s.start_state = 1;
    const auto held = run_replication(empty, s, 0);
    ASSERT_TRUE(held.absorbed_in.has_value());
    EXPECT_EQ(*held.absorbed_in, 1u);
    EXPECT_NEAR(find(held, "x").mean, 7.0, 1e-12);
}

// Cochran's Q test across replications. Two closed classes {0, 1} and {2, 3}
// (each a two-state ctmc with rates 1 both ways): runs started in different
// classes average x near 0.5 and near 2.5, with half-widths ~0.02 at T = 1e4.
TEST(SimulateHomogeneity, FlagsRunsInDifferentClosedClasses) {
    io::Chain c = io::chain_from_triples(io::ChainKind::ctmc, 4, {0, 1, 2, 3}, {1, 0, 3, 2},
                                         {1.0, 1.0, 1.0, 1.0});
    c.variables.push_back({"x", true, {0.0, 1.0, 2.0, 3.0}, {}, {}});
    c.measures.push_back({"one", {1.0, 1.0, 1.0, 1.0}}); // the same in both classes
    SimulationSettings in_a = by_time(1e4, 8), in_b = by_time(1e4, 8);
    in_b.start_state = 2;
    const std::vector<ReplicationResult> runs = {run_replication(c, in_a, 0),
                                                 run_replication(c, in_b, 1)};
    const auto flagged = disagreeing_quantities(runs);
    EXPECT_EQ(flagged, std::vector<std::string>{"x"});

    // From a transient start that falls into either class with probability 1/2:
    // of 8 runs all land in one class with probability 2^-7 over seeds; this
    // seed splits them (checked), and the test flags them.
    io::Chain fork = io::chain_from_triples(io::ChainKind::ctmc, 5, {0, 1, 2, 3, 4, 4},
                                            {1, 0, 3, 2, 0, 2}, {1.0, 1.0, 1.0, 1.0, 1.0, 1.0});
    fork.variables.push_back({"x", true, {0.0, 1.0, 2.0, 3.0, 9.0}, {}, {}});
    SimulationSettings from_fork = by_time(1e4, 8);
    from_fork.start_state = 4;
    std::vector<ReplicationResult> forked;
    std::set<bool> classes;
    for (std::uint64_t i = 0; i < 8; ++i) {
        forked.push_back(run_replication(fork, from_fork, i));
        classes.insert(forked.back().final_state >= 2);
    }
    ASSERT_EQ(classes.size(), 2u);
    EXPECT_EQ(disagreeing_quantities(forked), std::vector<std::string>{"x"});
}

// The test's power at a modest shift: M/M/1/5 with arrival rates 0.8 and 0.9
// (mu = 1) have mean occupancies 1.868 and 2.195 (Gross & Harris closed form),
// a difference of about 6.5 standard errors at T = 2e4 (each mean's standard
// error is about sqrt(21 / 2e4) = 0.032, scipy's sigma^2 as above): Q near 40
// against 10.8, the 1e-3 point of chi-square(1); missing it takes an error of
// over 3 standard errors. A test that overstated the variances tenfold would
// miss it (tried).
TEST(SimulateHomogeneity, FlagsAModestShift) {
    const double T = 2e4;
    const std::vector<ReplicationResult> runs = {
        run_replication(testing_support::birth_death(1, 5, 0.8, 1.0), by_time(T, 12), 0),
        run_replication(testing_support::birth_death(1, 5, 0.9, 1.0), by_time(T, 12), 1)};
    EXPECT_EQ(disagreeing_quantities(runs), std::vector<std::string>{"n"});
}

// An ergodic chain (M/M/1/K as above), 8 replications: no flag, and pooling
// narrows the interval by about sqrt(8). False alarms: under homogeneity Q is
// about chi-square(7), so each quantity is flagged with probability about
// 1e-3 (a little more, as the variances are estimated from ~450 batches each);
// with 2 quantities, under 1 % of seeds would flag, and this seed is fixed.
TEST(SimulateHomogeneity, ErgodicChainIsNotFlaggedAndPoolsNarrower) {
    const int K = 5;
    const double lambda = 0.8, mu = 1.0, T = 2e4;
    io::Chain chain = testing_support::birth_death(1, K, lambda, mu);
    io::Measure full{"full", std::vector<double>(K + 1, 0.0)};
    full.values[K] = 1;
    chain.measures.push_back(full);
    std::vector<ReplicationResult> runs;
    const auto prepared = prepare(chain);
    for (std::uint64_t i = 0; i < 8; ++i)
        runs.push_back(run_replication(*prepared, by_time(T, 2024), i));
    EXPECT_TRUE(disagreeing_quantities(runs).empty());

    const auto p = testing_support::mmck_closed_form(1, K, lambda, mu);
    double mean = 0;
    for (int n = 0; n <= K; ++n)
        mean += n * p[n];
    const auto pooled = pool(runs, 0.95);
    ASSERT_EQ(pooled.size(), 2u);
    // The pooled run is 8 T long: (a) and (b) with the same asymptotic variances
    // as the single run above.
    expect_consistent(pooled[0], mean, 20.951693361001922, 8 * T);
    expect_consistent(pooled[1], p[K], 0.3151974352436007, 8 * T);
    EXPECT_LT(pooled[0].half_width, runs[0].estimates[0].half_width / 2);
}

TEST(SimulateSettings, RefusesWhatItCannotRun) {
    const io::Chain chain = testing_support::birth_death(1, 3, 1.0, 1.0);
    SimulationSettings none;
    EXPECT_THROW(run_replication(chain, none, 0), std::invalid_argument);
    SimulationSettings both = by_time(10);
    both.length.steps = 10;
    EXPECT_THROW(run_replication(chain, both, 0), std::invalid_argument);
    SimulationSettings outside = by_time(10);
    outside.start_state = 4;
    EXPECT_THROW(run_replication(chain, outside, 0), std::invalid_argument);
}

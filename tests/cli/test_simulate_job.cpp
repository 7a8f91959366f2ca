// The simulate job called as a library on 1, 2 and 3 ranks: closed forms, a
// correct and a deliberately wrong solved result, a chain that is not ergodic
// from its start, and the same numbers whatever the number of ranks.
//
// Sample sizes. A check "|estimate - exact| <= 2 half-widths of the 95 %
// interval" allows about 3.9 standard errors: a correct simulator misses it with
// probability about 1e-4 per check (normal approximation), and the seeds are
// fixed, so a pass is reproducible rather than lucky. So that the check has
// teeth, each test also bounds the half-width itself (a few per cent of the
// value): the run lengths below give half-widths well inside those bounds
// (estimated from the relaxation time 1/(sqrt(mu) - sqrt(lambda))^2 of the
// birth-death queue and the variance N/4 of the urn; common practice).
#include "cli/simulate_job.hpp"
#include "cli/simulate_output.hpp"
#include "support/mpi_fixture.hpp"
#include "support/test_chains.hpp"

#include <hdf5.h>

#include <filesystem>

namespace longrun {
namespace {

using testing_support::MpiTest;

class SimulateJob : public MpiTest {
  protected:
    static const simulate::Estimate& find(const std::vector<simulate::Estimate>& list,
                                          const std::string& name) {
        for (const auto& e : list)
            if (e.name == name)
                return e;
        throw std::runtime_error("no estimate named " + name);
    }
    static cli::SimulateRequest request(const std::string& chain, std::uint64_t replications,
                                        std::uint64_t seed) {
        cli::SimulateRequest r;
        r.chain_path = chain;
        r.replications = replications;
        r.seed = seed;
        return r;
    }
    // Solved with the project's own solver to a tight tolerance, written to a file.
    std::string solved(const std::string& chain, const std::string& name) {
        cli::SolveRequest s;
        s.chain_path = chain;
        s.output = folder + "/" + name;
        s.tolerance = 1e-12;
        s.progress = false;
        (void)cli::run_solve(MPI_COMM_WORLD, s);
        MPI_Barrier(MPI_COMM_WORLD);
        return *s.output;
    }
    // Rank 0 overwrites /distribution of a copy of `result` with `pi`.
    std::string with_distribution(const std::string& result, const std::vector<double>& pi,
                                  const std::string& name) {
        const std::string path = folder + "/" + name;
        if (rank == 0) {
            std::filesystem::copy_file(result, path);
            const hid_t file = H5Fopen(path.c_str(), H5F_ACC_RDWR, H5P_DEFAULT);
            const hid_t set = H5Dopen2(file, "/distribution", H5P_DEFAULT);
            const herr_t status =
                H5Dwrite(set, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, pi.data());
            H5Dclose(set);
            H5Fclose(file);
            EXPECT_GE(status, 0);
        }
        MPI_Barrier(MPI_COMM_WORLD);
        return path;
    }
};

// M/M/1/K with an event "lost" whose intensity is lambda where the system is full
// (an arrival turned away), so its long-run rate is lambda p_K.
io::Chain mm1k_with_loss(int K, double lambda, double mu) {
    io::Chain chain = testing_support::birth_death(1, K, lambda, mu);
    io::Measure lost{"lost", std::vector<double>(K + 1, 0.0)};
    lost.values[K] = lambda;
    chain.event_intensities.push_back(lost);
    return chain;
}

constexpr int K = 10;
constexpr double lambda = 0.8, mu = 1.0;

// Mean occupancy L = sum n p_n and loss rate lambda p_K with p_n the M/M/1/K law
// (Gross & Harris, Fundamentals of Queueing Theory, the M/M/1/K model).
TEST_F(SimulateJob, QueueOccupancyAndLossRateMatchTheClosedForm) {
    const auto path = write(mm1k_with_loss(K, lambda, mu), "mm1k.h5");
    const auto p = testing_support::mmck_closed_form(1, K, lambda, mu);
    double occupancy = 0;
    for (int n = 0; n <= K; ++n)
        occupancy += n * p[n];
    const double loss = lambda * p[K];

    auto r = request(path, 4, 2024);
    r.length.time = 1e6;
    r.length.warmup = 1e3;
    const auto report = cli::run_simulation(MPI_COMM_WORLD, r);
    ASSERT_EQ(report.replications.size(), 4u);
    EXPECT_TRUE(report.ergodic_from_start()) << report.verdict;
    EXPECT_EQ(report.exit_code, 0);
    const auto& n = find(report.pooled, "n");
    const auto& lost = find(report.pooled, "lost");
    EXPECT_EQ(n.kind, "variable");
    EXPECT_EQ(lost.kind, "event");
    EXPECT_NEAR(n.mean, occupancy, 2 * n.half_width);
    EXPECT_LT(n.half_width, 0.03 * occupancy);
    EXPECT_NEAR(lost.mean, loss, 2 * lost.half_width);
    EXPECT_LT(lost.half_width, 0.05 * loss);
    for (const auto& rep : report.replications)
        EXPECT_FALSE(rep.absorbed_in.has_value());
}

// Ehrenfest urn with N balls (dtmc, period 2): the stationary law of the number in
// the first urn is Binomial(N, 1/2), mean N/2 and variance N/4 (Kac, "Random walk
// and the theory of Brownian motion", Amer. Math. Monthly 54, 1947). The variance
// is the time average of the measure (k - N/2)^2.
TEST_F(SimulateJob, EhrenfestUrnMeanAndVarianceAreBinomial) {
    const int N = 20;
    std::vector<std::vector<double>> P(N + 1, std::vector<double>(N + 1, 0.0));
    for (int k = 0; k <= N; ++k) {
        if (k > 0)
            P[k][k - 1] = double(k) / N;
        if (k < N)
            P[k][k + 1] = double(N - k) / N;
    }
    io::Chain urn = testing_support::dense_dtmc(P);
    io::StateVariable first{"first_urn", true, {}, 0.0, double(N)};
    io::Measure spread{"spread", {}};
    for (int k = 0; k <= N; ++k) {
        first.values.push_back(k);
        spread.values.push_back((k - N / 2.0) * (k - N / 2.0));
    }
    urn.variables.push_back(first);
    urn.measures.push_back(spread);
    const auto path = write(urn, "ehrenfest.h5");

    auto r = request(path, 3, 77);
    r.length.steps = 2'000'000;
    r.length.warmup = 1000;
    r.from = "first_urn=0"; // far from the middle: the warm-up matters
    const auto report = cli::run_simulation(MPI_COMM_WORLD, r);
    EXPECT_EQ(report.start_state, 0u);
    EXPECT_EQ(report.length_unit, "steps");
    EXPECT_TRUE(report.ergodic_from_start()) << report.verdict;
    const auto& mean = find(report.pooled, "first_urn");
    const auto& variance = find(report.pooled, "spread");
    EXPECT_EQ(variance.kind, "measure");
    EXPECT_NEAR(mean.mean, N / 2.0, 2 * mean.half_width);
    EXPECT_LT(mean.half_width, 0.01 * N / 2.0);
    EXPECT_NEAR(variance.mean, N / 4.0, 2 * variance.half_width);
    EXPECT_LT(variance.half_width, 0.03 * N / 4.0);
}

// A correct solve is confirmed (exit 0, every quantity "ok"); a result whose
// /distribution is the M/M/1/K law of another arrival rate is flagged (exit 5,
// the quantities named).
TEST_F(SimulateJob, AgainstCorrectResultAgreesAndAgainstWrongOneDisagrees) {
    const auto path = write(mm1k_with_loss(K, lambda, mu), "mm1k.h5");
    const auto result = solved(path, "mm1k-result.h5");
    auto r = request(path, 4, 99);
    r.length.time = 5e5;
    r.against = result;
    const auto good = cli::run_simulation(MPI_COMM_WORLD, r);
    EXPECT_EQ(good.exit_code, 0) << good.verdict;
    EXPECT_EQ(good.compared, 2u); // n and lost
    EXPECT_EQ(good.disagreements, 0u);
    // Bonferroni: 2 quantities at a 95 % family level -> 97.5 % each.
    EXPECT_DOUBLE_EQ(good.pooled_confidence, 1 - 0.05 / 2);
    ASSERT_EQ(good.comparisons.size(), good.pooled.size());
    const auto p = testing_support::mmck_closed_form(1, K, lambda, mu);
    for (const auto& c : good.comparisons) {
        ASSERT_TRUE(c.solved.has_value()) << c.name;
        EXPECT_TRUE(c.agrees) << c.name;
        if (c.name == "lost") { // the solved value is what `summarize` reports
            EXPECT_NEAR(*c.solved, lambda * p[K], 1e-9);
        }
    }
    EXPECT_NE(good.verdict.find("agrees with"), std::string::npos) << good.verdict;

    const auto wrong_pi = testing_support::mmck_closed_form(1, K, 0.6, mu);
    const auto wrong = with_distribution(result, wrong_pi, "wrong-result.h5");
    r.against = wrong;
    const auto bad = cli::run_simulation(MPI_COMM_WORLD, r);
    EXPECT_EQ(bad.exit_code, 5);
    EXPECT_EQ(bad.disagreements, 2u);
    EXPECT_NE(bad.verdict.find("DISAGREES"), std::string::npos) << bad.verdict;
    EXPECT_NE(bad.verdict.find(": n, lost"), std::string::npos) << bad.verdict;
    const auto text = cli::simulate_text(bad, r, true);
    EXPECT_NE(text.find("DISAGREES"), std::string::npos);
    const auto json = cli::simulate_json(bad, r);
    EXPECT_EQ(json["exit_code"], 5);
    EXPECT_EQ(json["against"]["disagreements"], 2);
}

// Two closed classes reached from a transient start: state 0 leads (rate 1 each)
// to the cycle {1, 2} or to the absorbing state 3. Each replication settles in one
// of them, so their time averages of `side` (0 or 1) differ: never pooled.
TEST_F(SimulateJob, TwoClosedClassesFromATransientStartAreReportedNotPooled) {
    io::Chain chain = io::chain_from_triples(io::ChainKind::ctmc, 4, {0, 0, 1, 2}, {1, 3, 2, 1},
                                             {1.0, 1.0, 2.0, 3.0});
    chain.variables.push_back({"side", true, {0, 0, 0, 1}, 0.0, 1.0});
    chain.variables.push_back({"place", true, {0, 1, 2, 3}, 0.0, 3.0});
    const auto path = write(chain, "two-classes.h5");
    // 12 replications: all in one class has probability 2^-11 for a fair split, and
    // the seed is fixed.
    auto r = request(path, 12, 5);
    r.length.time = 2e4;
    r.from = "side=0,place=0";
    const auto report = cli::run_simulation(MPI_COMM_WORLD, r);
    EXPECT_EQ(report.start_state, 0u);
    EXPECT_FALSE(report.ergodic_from_start());
    EXPECT_TRUE(report.pooled.empty());
    EXPECT_NE(std::find(report.disagreeing.begin(), report.disagreeing.end(), "side"),
              report.disagreeing.end());
    EXPECT_NE(report.verdict.find(cli::not_ergodic_words), std::string::npos) << report.verdict;
    int absorbed = 0, cycling = 0;
    for (const auto& end : report.ends) {
        if (end.absorbed) {
            ++absorbed;
            EXPECT_EQ(end.state, 3u);
            EXPECT_EQ(end.description, "state 3 (side=1, place=3)");
        } else {
            ++cycling;
            EXPECT_TRUE(end.state == 1 || end.state == 2) << end.state;
        }
    }
    EXPECT_GT(absorbed, 0);
    EXPECT_GT(cycling, 0);
    const auto text = cli::simulate_text(report, r, false);
    EXPECT_NE(text.find("not ergodic from this start"), std::string::npos);
    EXPECT_EQ(text.find("pooled"), std::string::npos);
    EXPECT_NE(text.find("absorbed"), std::string::npos);
    EXPECT_EQ(report.exit_code, 0); // nothing to compare with: a finding, not a failure

    // Against a result of this chain (solved class by class from state 0): not
    // compared, and exit 5, for no single long-run distribution describes this start.
    {
        cli::SolveRequest s;
        s.chain_path = path;
        s.output = folder + "/per-class.h5";
        s.per_class = true;
        s.start_state = 0;
        s.progress = false;
        (void)cli::run_solve(MPI_COMM_WORLD, s);
        MPI_Barrier(MPI_COMM_WORLD);
        r.against = s.output;
    }
    const auto against = cli::run_simulation(MPI_COMM_WORLD, r);
    EXPECT_EQ(against.exit_code, 5);
    EXPECT_TRUE(against.pooled.empty());
    EXPECT_NE(against.verdict.find("was not compared"), std::string::npos) << against.verdict;

    // A result of another chain with as many states (a 4-state cycle) is refused
    // before anything is simulated: bad input naming both files.
    const auto cycle = write(io::chain_from_triples(io::ChainKind::ctmc, 4, {0, 1, 2, 3},
                                                    {1, 2, 3, 0}, {1.0, 1.0, 1.0, 1.0}),
                             "cycle.h5");
    r.against = solved(cycle, "cycle-result.h5");
    try {
        (void)cli::run_simulation(MPI_COMM_WORLD, r);
        ADD_FAILURE() << "a result of another chain was compared";
    } catch (const Error& e) {
        EXPECT_EQ(e.code(), ExitCode::bad_input);
        EXPECT_NE(std::string(e.what()).find("cycle-result.h5"), std::string::npos) << e.what();
        EXPECT_NE(std::string(e.what()).find("two-classes.h5"), std::string::npos) << e.what();
    }
}

// Replication r runs on rank r % size, yet every number is what one process alone
// computes for (seed, r): the test runs on 1, 2 and 3 ranks.
TEST_F(SimulateJob, SameNumbersOnAnyNumberOfRanks) {
    const io::Chain chain = testing_support::tandem(6, 5, 1.0, 1.5, 1.3);
    const auto path = write(chain, "tandem.h5");
    auto r = request(path, 5, 11);
    r.length.time = 2e3;
    const auto report = cli::run_simulation(MPI_COMM_WORLD, r);
    ASSERT_EQ(report.replications.size(), 5u);
    simulate::SimulationSettings s;
    s.length = r.length;
    s.seed = r.seed;
    s.confidence = r.confidence;
    for (std::uint64_t i = 0; i < 5; ++i) {
        const auto alone = simulate::run_replication(chain, s, i);
        const auto& got = report.replications[i];
        EXPECT_EQ(got.index, i);
        EXPECT_EQ(got.transitions, alone.transitions);
        EXPECT_EQ(got.final_state, alone.final_state);
        ASSERT_EQ(got.estimates.size(), alone.estimates.size());
        for (std::size_t q = 0; q < got.estimates.size(); ++q) {
            EXPECT_EQ(got.estimates[q].mean, alone.estimates[q].mean); // bit for bit
            EXPECT_EQ(got.estimates[q].half_width, alone.estimates[q].half_width);
            EXPECT_EQ(got.estimates[q].standard_error, alone.estimates[q].standard_error);
            EXPECT_EQ(got.estimates[q].batches, alone.estimates[q].batches);
        }
    }
}

TEST_F(SimulateJob, BadRequestsAreRefusedOnEveryRank) {
    const auto queue = write(mm1k_with_loss(K, lambda, mu), "mm1k.h5");
    const auto urn = write(testing_support::dense_dtmc({{0, 1}, {1, 0}}), "flip.h5");
    auto expect_code = [&](cli::SimulateRequest r, ExitCode code, const std::string& words) {
        try {
            (void)cli::run_simulation(MPI_COMM_WORLD, r);
            ADD_FAILURE() << "accepted: " << words;
        } catch (const Error& e) {
            EXPECT_EQ(e.code(), code) << e.what();
            EXPECT_NE(std::string(e.what()).find(words), std::string::npos) << e.what();
        }
    };
    auto r = request(queue, 2, 1);
    r.length.time = 10;
    auto no_length = r;
    no_length.length.time.reset();
    expect_code(no_length, ExitCode::usage, "--time T or --steps N");
    auto from_far = r;
    from_far.from = "11";
    expect_code(from_far, ExitCode::usage, "not a state");
    auto unknown_variable = r;
    unknown_variable.from = "queue=3";
    expect_code(unknown_variable, ExitCode::usage, "no state variable 'queue'");
    auto no_such_state = r;
    no_such_state.from = "n=42";
    expect_code(no_such_state, ExitCode::usage, "no state of the chain");
    auto dtmc_time = request(urn, 2, 1);
    dtmc_time.length.time = 10;
    expect_code(dtmc_time, ExitCode::usage, "--steps");
    auto missing = r;
    missing.chain_path = folder + "/nowhere.h5";
    expect_code(missing, ExitCode::bad_input, "nowhere.h5");
    // A result of another chain (31 states against 11).
    const auto other = solved(write(mm1k_with_loss(30, lambda, mu), "other.h5"), "other-result.h5");
    auto mismatched = r;
    mismatched.against = other;
    expect_code(mismatched, ExitCode::bad_input, "31 states");
}

} // namespace
} // namespace longrun

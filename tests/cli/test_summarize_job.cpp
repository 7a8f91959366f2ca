// The summarize job called as a library on 1, 2 and 3 ranks: the probability at
// a state variable's declared bounds when the variable has more values than a
// summary keeps points, so that its distribution is stored in bins; the error
// bound every number carries, and the marks on what it leaves unresolved.
#include "cli/summarize_job.hpp"
#include "cli/summary_output.hpp"
#include "io/result_file.hpp"
#include "io/summary_file.hpp"
#include "summary/measure_summary.hpp"
#include "support/mpi_fixture.hpp"
#include "support/test_chains.hpp"

#include <fmt/format.h>
#include <hdf5.h>

#include <algorithm>
#include <cmath>
#include <optional>

namespace longrun {
namespace {

using testing_support::MpiTest;

class SummarizeJob : public MpiTest {
  protected:
    // Rank 0 writes the whole distribution; everyone gets the path when it is complete.
    // `error_estimate` absent: a result as an older longrun wrote it, without one.
    std::string write_result(const std::string& chain_path, const std::vector<double>& pi,
                             std::optional<double> error_estimate = 0.0,
                             const std::string& name = "result.h5") {
        const std::string path = folder + "/" + name;
        if (rank == 0) {
            io::ResultContent content;
            // No content hash: paired with the chain by its number of states.
            content.origin = {chain_path, 0, 0, "test", "ctmc", "", ""};
            content.certificate.method = "closed form";
            content.certificate.converged = true;
            content.certificate.residual_definition = "||pi Q||_1 / max_i |q_ii|";
            content.certificate.error_estimate = error_estimate.value_or(0.0);
            content.certificate.error_estimate_method = "test";
            io::write_result_file(path, MPI_COMM_SELF, content, {0, pi.size()}, pi.size(), pi);
            if (!error_estimate) {
                const hid_t f = H5Fopen(path.c_str(), H5F_ACC_RDWR, H5P_DEFAULT);
                const hid_t g = H5Gopen2(f, "/certificate", H5P_DEFAULT);
                EXPECT_GE(H5Adelete(g, "error_estimate"), 0);
                EXPECT_GE(H5Adelete(g, "error_estimate_method"), 0);
                H5Gclose(g);
                H5Fclose(f);
            }
        }
        MPI_Barrier(MPI_COMM_WORLD);
        return path;
    }
};

TEST_F(SummarizeJob, BoundMassOfABinnedVariableIsSummedOverItsStates) {
    // One more value than the summary keeps points: the distribution of n is binned,
    // and the last bin holds both K - 1 and K.
    const int K = static_cast<int>(summary::default_max_points);
    const io::Chain chain = testing_support::birth_death(1, K, 1.0, 1.0);
    // M/M/1/K at rho = lambda/mu = 1: P(N = n) = 1/(K+1) for every n (Gross & Harris,
    // Fundamentals of Queueing Theory, section "Finite queue M/M/1/K").
    const double p = 1.0 / (K + 1);
    const std::vector<double> pi(static_cast<std::size_t>(K) + 1, p);
    const std::string chain_path = write(chain, "queue.h5");
    const std::string result_path = write_result(chain_path, pi);

    cli::SummaryRequest request;
    request.result_path = result_path;
    request.chain_path = chain_path;
    request.store = false;
    request.progress = false;
    const cli::SummaryReport report = cli::run_summary(MPI_COMM_WORLD, request);

    const auto& measures = report.summary.measures;
    const auto n =
        std::find_if(measures.begin(), measures.end(), [](const auto& m) { return m.name == "n"; });
    ASSERT_NE(n, measures.end());
    EXPECT_TRUE(n->binned);
    ASSERT_TRUE(n->lower_bound && n->upper_bound);
    EXPECT_EQ(*n->lower_bound, 0);
    EXPECT_EQ(*n->upper_bound, K);
    ASSERT_TRUE(n->mass_at_lower && n->mass_at_upper);
    // Not 0 (nothing read off a binned pmf), not 2/(K+1) (the last bin's mass).
    EXPECT_NEAR(*n->mass_at_lower, p, 1e-12 * p);
    EXPECT_NEAR(*n->mass_at_upper, p, 1e-12 * p);
    // 1/(K+1) ~ 1e-5 is above the 1e-6 threshold: the truncation warning names n.
    ASSERT_EQ(report.truncation_threshold, 1e-6);
    ASSERT_EQ(report.warnings.size(), 1u);
    EXPECT_NE(report.warnings[0].find("P(n = " + std::to_string(K) + ")"), std::string::npos)
        << report.warnings[0];
}

// M/M/1/K at rho = 0.5, K = 30: p_n = (1 - rho) rho^n / (1 - rho^(K+1)) (Gross &
// Harris, Fundamentals of Queueing Theory, "Finite queue M/M/1/K"), written as the
// answer of a solve whose estimated error is `error_estimate`.
class QueueTails : public SummarizeJob {
  protected:
    static constexpr int K = 30;
    static constexpr double rho = 0.5;

    static double p(int n) { return (1 - rho) * std::pow(rho, n) / (1 - std::pow(rho, K + 1)); }
    static double tail(int from) {
        double t = 0;
        for (int n = K; n >= from; --n)
            t += p(n);
        return t;
    }

    cli::SummaryReport summarize(std::optional<double> error_estimate,
                                 std::vector<std::string> quantiles = {}) {
        const std::string chain_path =
            write(testing_support::birth_death(1, K, rho, 1.0), "mm1k.h5");
        std::vector<double> pi;
        for (int n = 0; n <= K; ++n)
            pi.push_back(p(n));
        cli::SummaryRequest request;
        request.result_path = write_result(chain_path, pi, error_estimate);
        request.chain_path = chain_path;
        request.tails = {"far=n>=28", "near=n>=6"};
        request.quantiles = std::move(quantiles);
        request.progress = false;
        return cli::run_summary(MPI_COMM_WORLD, request);
    }

    static const io::ProbabilityRecord& probability(const cli::SummaryReport& r,
                                                    const std::string& name) {
        for (const auto& q : r.summary.probabilities)
            if (q.name == name)
                return q;
        throw std::logic_error("no probability " + name);
    }
};

TEST_F(QueueTails, AFarTailBelowTheBoundIsMarkedWithTheTolThatResolvesIt) {
    // As from a solve at --tol 1e-6: every probability within 5e-7.
    const cli::SummaryReport r = summarize(1e-6);
    ASSERT_TRUE(r.summary.probability_error_bound);
    EXPECT_EQ(*r.summary.probability_error_bound, 5e-7);
    const double far = probability(r, "far").probability;
    EXPECT_NEAR(far, tail(28), 1e-12 * tail(28)); // ~3.3e-9
    // P(n >= 6) = rho^6 (1 - rho^25) / (1 - rho^31) ~ 1.6e-2: far above 1e-6.
    EXPECT_NEAR(probability(r, "near").probability, tail(6), 1e-12);

    const std::string text = cli::summary_text(r);
    // 3.3e-9 / 10 = 3.3e-10: the largest power of ten below is 1e-10.
    EXPECT_NE(text.find("P(far) = P(n>=28) = 3.259629e-09 (unresolved: --tol 1e-10)\n"),
              std::string::npos)
        << text;
    EXPECT_NE(text.find("P(near) = P(n>=6) = 1.562500e-02\n"), std::string::npos) << text;
    EXPECT_NE(text.find("estimated error ||pi_hat - pi||_1 = 1.00e-06"), std::string::npos) << text;
    EXPECT_NE(text.find("within 5.0e-07"), std::string::npos) << text;
    EXPECT_NE(text.find("       0?         3         6         9  P(>=4)"), std::string::npos)
        << text;
    // The tail column marks its entries below 1e-6: P(n >= 20) ~ 9.5e-7 and
    // P(n >= 30) = p_30 ~ 4.7e-10; not P(n >= 10) ~ 9.8e-4.
    EXPECT_NE(text.find("P(>=10)=9.77e-04  P(>=20)=9.53e-07 (unresolved: --tol 1e-08)  "
                        "P(>=30)=4.66e-10 (unresolved: --tol 1e-11)\n"),
              std::string::npos)
        << text;
    EXPECT_NE(text.find("\nunresolved: below 1.0e-06"), std::string::npos) << text;

    const nlohmann::json j = cli::summary_json(r);
    for (const auto& q : j["probabilities"]) {
        EXPECT_EQ(q["error_bound"], 5e-7);
        if (q["name"] == "far") {
            EXPECT_EQ(q["resolved"], false);
            EXPECT_EQ(q["tol_to_resolve"], 1e-10);
        } else {
            EXPECT_EQ(q["resolved"], true);
            EXPECT_TRUE(q["tol_to_resolve"].is_null());
        }
    }
    const auto& n = j["measures"][0];
    ASSERT_EQ(n["name"], "n");
    // Values 0..30: the mean is within 30 * 5e-7.
    EXPECT_NEAR(n["error_bound"].get<double>(), 1.5e-5, 1e-20);
    // Tails fall: P(n >= 20) ~ 9.5e-7 is the first below 1e-6.
    EXPECT_EQ(n["unresolved_tail"]["at_least"], 20);
    EXPECT_EQ(n["unresolved_tail"]["tol_to_resolve"], 1e-8);

    const std::string csv = cli::summary_csv(r);
    EXPECT_NE(csv.find("kind,name,statistic,value,error_bound,resolved\n"), std::string::npos);
    const auto far_row = csv.find("probability,\"far\",\"P\",");
    ASSERT_NE(far_row, std::string::npos) << csv;
    const std::string far_line = csv.substr(far_row, csv.find('\n', far_row) - far_row);
    EXPECT_NE(far_line.find(",4.9999999999999998e-07,false"), std::string::npos) << far_line;
    const auto near_row = csv.find("probability,\"near\",\"P\",");
    ASSERT_NE(near_row, std::string::npos) << csv;
    EXPECT_NE(csv.substr(near_row, csv.find('\n', near_row) - near_row).find(",true"),
              std::string::npos);

    // Stored in /summary with the numbers.
    if (rank == 0) {
        const io::SummaryRecord stored = io::read_summary(folder + "/result.h5");
        ASSERT_TRUE(stored.probability_error_bound);
        EXPECT_EQ(*stored.probability_error_bound, 5e-7);
        ASSERT_FALSE(stored.measures.empty());
        ASSERT_TRUE(stored.measures[0].mean_error_bound);
        EXPECT_NEAR(*stored.measures[0].mean_error_bound, 1.5e-5, 1e-20);
        // The median sits at P(n >= 1) = 0.5 (1 - rho^30) / (1 - rho^31), 2.3e-10 from
        // 1/2: the bound could move it. 99.9 % is resolved (next test).
        const auto& quantiles = stored.measures[0].quantiles;
        ASSERT_EQ(quantiles.size(), r.summary.measures[0].quantiles.size());
        ASSERT_EQ(quantiles[0].level, 0.5);
        EXPECT_EQ(quantiles[0].resolved, std::optional<bool>(false));
        EXPECT_EQ(quantiles.back().level, 0.999);
        EXPECT_EQ(quantiles.back().resolved, std::optional<bool>(true));
    }
}

TEST_F(QueueTails, AQuantileTheBoundCouldMoveIsUnresolved) {
    // P(n >= 10) = rho^10 (1 - rho^21) / (1 - rho^31): a level whose 1 - level lies
    // 1e-7 above it, within the bound 5e-7; the quantile is 9 (P(n > 9) <= 1 - level),
    // but the exact P(n > 9) may exceed 1 - level, which would make it 10.
    const double level = 1 - tail(10) - 1e-7;
    const cli::SummaryReport r = summarize(1e-6, {"n:" + fmt::format("{:.17g}", level)});
    const auto& quantiles = r.summary.measures.at(0).quantiles;
    const auto close_one = std::find_if(quantiles.begin(), quantiles.end(),
                                        [&](const auto& q) { return q.level == level; });
    ASSERT_NE(close_one, quantiles.end());
    EXPECT_EQ(close_one->value, 9);
    ASSERT_TRUE(close_one->resolved);
    EXPECT_FALSE(*close_one->resolved);
    // 99.9 %: the tails on either side, P(n >= 9) ~ 2.0e-3 and P(n >= 10) ~ 9.8e-4,
    // are far from 1e-3.
    for (const auto& q : quantiles)
        if (q.level == 0.999) {
            EXPECT_EQ(q.value, 9);
            EXPECT_TRUE(q.resolved.value_or(false));
        }
    const std::string text = cli::summary_text(r);
    EXPECT_NE(text.find(": 9?\n"), std::string::npos) << text;
}

TEST_F(QueueTails, AResultWithoutAnEstimateMarksNothing) {
    const cli::SummaryReport r = summarize(std::nullopt);
    EXPECT_FALSE(r.solve.error_estimate);
    EXPECT_FALSE(r.summary.probability_error_bound);
    const std::string text = cli::summary_text(r);
    EXPECT_NE(text.find("error not estimated (result from an older longrun)"), std::string::npos)
        << text;
    EXPECT_EQ(text.find("unresolved"), std::string::npos) << text;
    const nlohmann::json j = cli::summary_json(r);
    EXPECT_TRUE(j["probability_error_bound"].is_null());
    EXPECT_TRUE(j["probabilities"][0]["resolved"].is_null());
    if (rank == 0) {
        EXPECT_FALSE(io::read_summary(folder + "/result.h5").probability_error_bound);
    }
}

} // namespace
} // namespace longrun

// The summarize job called as a library on 1, 2 and 3 ranks: the probability at
// a state variable's declared bounds when the variable has more values than a
// summary keeps points, so that its distribution is stored in bins.
#include "cli/summarize_job.hpp"
#include "io/result_file.hpp"
#include "summary/measure_summary.hpp"
#include "support/mpi_fixture.hpp"
#include "support/test_chains.hpp"

#include <algorithm>

namespace longrun {
namespace {

using testing_support::MpiTest;

class SummarizeJob : public MpiTest {
  protected:
    // Rank 0 writes the whole distribution; everyone gets the path when it is complete.
    std::string write_result(const std::string& chain_path, const std::vector<double>& pi) {
        const std::string path = folder + "/result.h5";
        if (rank == 0) {
            io::ResultContent content;
            // No content hash: paired with the chain by its number of states.
            content.origin = {chain_path, 0, 0, "test", "ctmc", "", ""};
            content.certificate.method = "closed form";
            content.certificate.converged = true;
            content.certificate.residual_definition = "||pi Q||_1 / max_i |q_ii|";
            io::write_result_file(path, MPI_COMM_SELF, content, {0, pi.size()}, pi.size(), pi);
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

} // namespace
} // namespace longrun

// The error estimate must be honest: on chains whose answer is known from
// outside the project, the estimated ||pi_hat - pi||_1 may overstate the true
// error by at most 100x and understate it by at most 2x (issue: "certified"
// means the answer is accurate). Tolerances are loose enough that the errors
// are measurable (well above the rounding level of the references).
#include "support/mpi_fixture.hpp"
#include "support/test_chains.hpp"

#include <gtest/gtest.h>

#include <cmath>
#include <fstream>
#include <sstream>

using namespace longrun;
using testing_support::MpiTest;

namespace {

// Below this, a reference evaluated in double cannot tell errors apart.
constexpr double measurable = 1e-13;

struct Reference {
    io::Chain chain;
    std::vector<double> pi;
};

// tests/data/courtois8.txt: the matrix and its exact stationary vector.
Reference courtois() {
    std::ifstream in(std::string(LONGRUN_TEST_DATA) + "/courtois8.txt");
    std::vector<std::vector<double>> p;
    std::vector<double> pi;
    std::string line;
    int section = -1;
    while (std::getline(in, line)) {
        if (line == "# matrix (row = source state)" || line == "# stationary vector") {
            ++section;
            continue;
        }
        if (line.empty() || line[0] == '#')
            continue;
        std::istringstream words(line);
        std::vector<double> row;
        for (double v; words >> v;)
            row.push_back(v);
        if (section == 0)
            p.push_back(row);
        else if (section == 1)
            pi.push_back(row.at(0));
    }
    return {testing_support::dense_dtmc(p), pi};
}

// M/M/1/K: p_n = (1 - rho) rho^n / (1 - rho^(K+1)) (Gross & Harris,
// Fundamentals of Queueing Theory, M/M/1/K).
Reference near_critical_queue(int K, double rho) {
    Reference r{testing_support::birth_death(1, K, rho, 1.0), {}};
    for (int n = 0; n <= K; ++n)
        r.pi.push_back((1 - rho) * std::pow(rho, n) / (1 - std::pow(rho, K + 1)));
    return r;
}

// Simple random walk on an odd ring (41 nodes) with chords of length 5 from
// every third node: not bipartite (odd cycle), so aperiodic and well
// conditioned; pi_i = deg(i) / 2|E| (Levin, Peres & Wilmer, Markov Chains and
// Mixing Times, section 1.5).
Reference ring_walk() {
    const auto edges = testing_support::ring_with_chords(41, 3, 5);
    return {testing_support::graph_walk(41, edges), testing_support::degree_law(41, edges)};
}

double distance_1(const std::vector<double>& a, const std::vector<double>& b) {
    double d = 0;
    for (std::size_t i = 0; i < a.size(); ++i)
        d += std::abs(a[i] - b[i]);
    return d;
}

class HonestEstimate : public MpiTest {
  protected:
    void check(const Reference& ref, const std::string& name, const std::string& method,
               double tol) {
        const auto report = solve(write(ref.chain, name), method, tol);
        const auto pi = gather(report);
        const double truth = distance_1(pi, ref.pi);
        const double estimate = report.certificate.error_estimate;
        SCOPED_TRACE(::testing::Message()
                     << name << " " << method << " tol " << tol << ": true " << truth
                     << ", estimate " << estimate << ", residual " << report.certificate.residual);
        EXPECT_TRUE(report.certified());
        EXPECT_LE(estimate, tol);
        EXPECT_LE(truth, tol) << "certified, but the answer is not within the tolerance";
        if (truth >= measurable) {
            EXPECT_GE(estimate, truth / 2) << "the estimate understates the error";
            EXPECT_LE(estimate, 100 * truth) << "the estimate overstates the error";
        }
    }
};

TEST_F(HonestEstimate, NearlyDecomposableChainEveryMethod) {
    // The case that motivated the estimate: power and Gauss-Seidel reached
    // residual 1e-10 with an error of 1.4e-7 here.
    const auto ref = courtois();
    ASSERT_EQ(ref.pi.size(), 8u);
    for (const std::string method : {"aggregation", "direct", "gth"})
        for (double tol : {1e-6, 1e-9})
            check(ref, "courtois.h5", method, tol);
    // The classical iterations lose a factor 10 of error per ~23,000 products
    // here (second eigenvalue about 1 - 1e-4), and between ranks the sweeps are
    // Jacobi: 1e-6 and 1e-7 keep the test short on 3 oversubscribed ranks.
    for (const std::string method : {"power", "gauss-seidel"})
        for (double tol : {1e-6, 1e-7})
            check(ref, "courtois.h5", method, tol);
    // GMRES and Krylov-Schur solve this 8-state chain to the rounding floor in
    // their first round, so no coarser iterate measures its condition and their
    // estimate is the spread of iterates at the floor, which understates the
    // error there (about 2e-13 estimated as 1e-15): a known limit, stated in
    // README ("How the error is estimated"); auto solves small chains with gth.
}

TEST_F(HonestEstimate, NearCriticalQueue) {
    const auto ref = near_critical_queue(300, 0.99);
    for (const std::string method : {"aggregation", "linear", "eigen", "direct", "auto"})
        for (double tol : {1e-6, 1e-9})
            check(ref, "mm1k-critical.h5", method, tol);
    // The classical iterations on a shorter line (their iteration counts grow
    // with the square of its length).
    const auto shorter = near_critical_queue(60, 0.99);
    for (const std::string method : {"power", "gauss-seidel"})
        check(shorter, "mm1k-critical-60.h5", method, 1e-8);
}

TEST_F(HonestEstimate, WellConditionedWalk) {
    const auto ref = ring_walk();
    for (const std::string method : {"power", "gauss-seidel", "aggregation", "linear", "auto"})
        for (double tol : {1e-6, 1e-10})
            check(ref, "ring-walk.h5", method, tol);
}

TEST_F(HonestEstimate, ResidualToleranceKeepsItsOldMeaningAndStillReportsTheError) {
    const auto ref = courtois();
    cli::SolveRequest request;
    request.chain_path = write(ref.chain, "courtois.h5");
    request.method = "power";
    request.residual_tolerance = 1e-10;
    request.progress = false;
    const auto report = cli::run_solve(MPI_COMM_WORLD, request);
    const double truth = distance_1(gather(report), ref.pi);
    EXPECT_TRUE(report.certified());
    EXPECT_LE(report.certificate.residual, 1e-10);
    // The error is far above the residual on this chain, and the report says so.
    EXPECT_GT(truth, 10 * report.certificate.residual);
    EXPECT_GE(report.certificate.error_estimate, truth / 2);
    EXPECT_LE(report.certificate.error_estimate, 100 * truth);
}

} // namespace

// The compare job called as a library (no command line) on 1, 2 and 3 ranks:
// chain files and Matrix Market files side by side, chains without a unique
// stationary distribution, a rank without rows, the time budget, and the
// Matrix Market kind detection.
#include "cli/compare_job.hpp"
#include "cli/matrix_market_kind.hpp"
#include "io/matrix_market.hpp"
#include "support/mpi_fixture.hpp"
#include "support/test_chains.hpp"

#include <fstream>

namespace longrun {
namespace {

using testing_support::MpiTest;

class CompareJob : public MpiTest {
  protected:
    std::string write_mtx(const io::Chain& chain, const std::string& name) {
        const std::string path = folder + "/" + name;
        if (rank == 0)
            io::write_matrix_market(path, chain);
        MPI_Barrier(MPI_COMM_WORLD);
        return path;
    }
    std::string write_text(const std::string& text, const std::string& name) {
        const std::string path = folder + "/" + name;
        if (rank == 0)
            std::ofstream(path) << text;
        MPI_Barrier(MPI_COMM_WORLD);
        return path;
    }
    static cli::CompareRequest request(std::vector<std::string> chains,
                                       std::vector<std::string> methods, double tol) {
        cli::CompareRequest r;
        r.chains = std::move(chains);
        r.methods = std::move(methods);
        r.tolerance = tol;
        r.progress = false;
        return r;
    }
};

// M/M/1/K with K = 30 has K + 1 states and 2K transitions (one birth below K, one
// death above 0: Kleinrock, Queueing Systems I, sec. 3.6).
TEST_F(CompareJob, ChainFileAndMatrixMarketSideBySide) {
    const int K = 30;
    const io::Chain chain = testing_support::birth_death(1, K, 0.7, 1.0);
    const auto h5 = write(chain, "mm1k.h5");
    const auto mtx = write_mtx(chain, "mm1k.mtx");
    const double tol = 1e-10;
    const auto report =
        cli::run_compare(MPI_COMM_WORLD, request({h5, mtx}, {"linear", "eigen"}, tol));
    ASSERT_EQ(report.chains.size(), 2u);
    ASSERT_EQ(report.runs.size(), 4u);
    EXPECT_EQ(report.ranks, size);
    for (const auto& c : report.chains) {
        EXPECT_EQ(c.states, std::uint64_t(K + 1)) << c.path;
        EXPECT_EQ(c.transitions, std::uint64_t(2 * K)) << c.path;
        EXPECT_EQ(c.kind, io::ChainKind::ctmc) << c.path;
        EXPECT_TRUE(c.solvable) << c.path;
        EXPECT_GT(c.product_seconds, 0) << c.path;
    }
    EXPECT_FALSE(report.chains[0].kind_detected);
    EXPECT_TRUE(report.chains[1].kind_detected);
    for (const auto& run : report.runs) {
        EXPECT_EQ(run.status, cli::RunStatus::converged) << run.chain << " " << run.outcome;
        ASSERT_TRUE(run.residual.has_value()) << run.method;
        EXPECT_LE(*run.residual, tol) << run.method;
        EXPECT_GT(run.matvecs, 0) << run.method;
        EXPECT_GT(run.product_equivalents, 0) << run.method;
        EXPECT_EQ(run.history.size(), run.history_seconds.size()) << run.method;
        EXPECT_GE(run.peak_memory_bytes, run.peak_memory_increase_bytes) << run.method;
    }
}

// Two closed classes (states 0 and 2 absorbing; common practice: an absorbing
// state is a closed class of its own): every method is a skipped row.
TEST_F(CompareJob, NoUniqueDistributionIsSkippedRows) {
    const auto h5 =
        write(testing_support::dense_dtmc({{1, 0, 0}, {0.5, 0, 0.5}, {0, 0, 1}}), "two-classes.h5");
    const auto report = cli::run_compare(MPI_COMM_WORLD, request({h5}, {"linear", "eigen"}, 1e-10));
    ASSERT_EQ(report.runs.size(), 2u);
    EXPECT_FALSE(report.chains[0].solvable);
    for (const auto& run : report.runs) {
        EXPECT_EQ(run.status, cli::RunStatus::skipped);
        EXPECT_NE(run.outcome.find("no unique stationary distribution"), std::string::npos)
            << run.outcome;
        EXPECT_FALSE(run.residual.has_value());
    }
}

// Two states on three ranks: a rank holds no rows and still takes part in every
// collective call (the product timing, the analysis, the method, the memory peak).
TEST_F(CompareJob, RankWithoutRows) {
    const auto h5 = write(testing_support::dense_dtmc({{0.5, 0.5}, {0.2, 0.8}}), "two.h5");
    const auto report = cli::run_compare(MPI_COMM_WORLD, request({h5}, {"linear"}, 1e-12));
    ASSERT_EQ(report.runs.size(), 1u);
    EXPECT_EQ(report.runs[0].status, cli::RunStatus::converged) << report.runs[0].outcome;
}

TEST_F(CompareJob, TimeBudgetSkipsRunsOnEveryRank) {
    const auto h5 = write(testing_support::birth_death(1, 5, 0.5, 1.0), "small.h5");
    auto r = request({h5}, {"linear", "eigen"}, 1e-10);
    r.max_seconds = 1e-9; // spent before the first run
    const auto report = cli::run_compare(MPI_COMM_WORLD, r);
    ASSERT_EQ(report.runs.size(), 2u);
    for (const auto& run : report.runs) {
        EXPECT_EQ(run.status, cli::RunStatus::skipped);
        EXPECT_NE(run.outcome.find("--max-seconds"), std::string::npos) << run.outcome;
    }
}

TEST_F(CompareJob, UnknownMethodIsUsageError) {
    try {
        (void)cli::parse_method_list("linear,warp");
        FAIL() << "no error";
    } catch (const Error& e) {
        EXPECT_EQ(e.code(), ExitCode::usage);
        EXPECT_NE(std::string(e.what()).find("warp"), std::string::npos);
    }
    EXPECT_THROW((void)cli::parse_method_list("auto"), UsageError);
    EXPECT_THROW((void)cli::parse_method_list("linear,linear"), UsageError);
    EXPECT_EQ(cli::parse_method_list("all").size(), solve::method_table().size());
}

constexpr const char* banner = "%%MatrixMarket matrix coordinate real general\n";

TEST_F(CompareJob, MatrixMarketKindFromRowSums) {
    const auto ctmc =
        write_text(std::string(banner) + "2 2 4\n1 1 -2\n1 2 2\n2 1 3\n2 2 -3\n", "q.mtx");
    const auto dtmc =
        write_text(std::string(banner) + "2 2 3\n1 1 0.25\n1 2 0.75\n2 1 1\n", "p.mtx");
    // Row 2 of a generator whose diagonal does not balance its rates.
    const auto broken =
        write_text(std::string(banner) + "2 2 4\n1 1 -2\n1 2 2\n2 1 3\n2 2 -1\n", "broken.mtx");
    EXPECT_EQ(cli::matrix_market_kind(ctmc), io::ChainKind::ctmc);
    EXPECT_EQ(cli::matrix_market_kind(dtmc), io::ChainKind::dtmc);
    try {
        (void)cli::matrix_market_kind(broken);
        FAIL() << "no error";
    } catch (const Error& e) {
        EXPECT_EQ(e.code(), ExitCode::bad_input);
        const std::string what = e.what();
        EXPECT_NE(what.find(broken), std::string::npos) << what;
        EXPECT_NE(what.find("row 2"), std::string::npos) << what;
    }
}

} // namespace
} // namespace longrun

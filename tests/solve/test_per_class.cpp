// Chains with several closed classes, solved class by class, with absorption
// probabilities and the long-run mixture from a start. MPI: 1, 2 and 3 ranks.
#include "support/mpi_fixture.hpp"
#include "support/test_chains.hpp"

#include <cmath>

namespace longrun {
namespace {

class PerClass : public testing_support::MpiTest {
  protected:
    cli::SolveReport solve_from(const std::string& path, std::optional<std::uint64_t> start) {
        cli::SolveRequest request;
        request.chain_path = path;
        request.tolerance = 1e-13;
        request.progress = false;
        request.per_class = true;
        request.start_state = start;
        return cli::run_solve(MPI_COMM_WORLD, request);
    }
};

io::Chain gamblers_ruin(int n, double up) {
    std::vector<std::vector<double>> p(n + 1, std::vector<double>(n + 1, 0.0));
    p[0][0] = 1;
    p[n][n] = 1;
    for (int i = 1; i < n; ++i) {
        p[i][i + 1] = up;
        p[i][i - 1] = 1 - up;
    }
    return testing_support::dense_dtmc(p);
}

TEST_F(PerClass, GamblersRuinAbsorptionMatchesTheClassicalFormula) {
    // P(reach N before 0 | start i) = (1 - r^i) / (1 - r^N), r = q/p (the gambler's
    // ruin problem; Feller, An Introduction to Probability Theory and Its
    // Applications I, ch. XIV.2).
    const int n = 10, i = 4;
    const double up = 0.45, r = (1 - up) / up;
    const auto path = write(gamblers_ruin(n, up), "ruin.h5");
    const auto report = solve_from(path, i);
    ASSERT_EQ(report.classes.size(), 2u);
    const double win = (1 - std::pow(r, i)) / (1 - std::pow(r, n));
    EXPECT_NEAR(*report.classes[1].probability, win, 1e-12);
    EXPECT_NEAR(*report.classes[0].probability, 1 - win, 1e-12);
    const auto pi = gather(report);
    EXPECT_NEAR(pi.front(), 1 - win, 1e-12);
    EXPECT_NEAR(pi.back(), win, 1e-12);
}

TEST_F(PerClass, TwoRecurrentClassesGetTheirOwnLawsAndTheMixtureFollowsTheStart) {
    // State 0 leaves to class {1,2} at rate 1 and to the ring {3,4,5} at rate 2, so
    // it ends in the classes with probabilities 1/3 and 2/3 (competing exponential
    // clocks). Inside {1,2}: rates 1 (1->2) and 3 (2->1), pi = (3/4, 1/4). The ring
    // 3->4->5->3 with rates 1, 2, 3 has pi proportional to 1/rate: (6, 3, 2)/11.
    std::vector<std::uint64_t> s{0, 0, 1, 2, 3, 4, 5};
    std::vector<std::uint64_t> t{1, 3, 2, 1, 4, 5, 3};
    std::vector<double> w{1, 2, 1, 3, 1, 2, 3};
    const auto path = write(io::chain_from_triples(io::ChainKind::ctmc, 6, s, t, w), "two.h5");
    const auto report = solve_from(path, 0);
    ASSERT_EQ(report.classes.size(), 2u);
    EXPECT_NEAR(*report.classes[0].probability, 1.0 / 3, 1e-12);
    EXPECT_NEAR(*report.classes[1].probability, 2.0 / 3, 1e-12);
    const auto pi = gather(report);
    const std::vector<double> expected{0,           0.75 / 3,         0.25 / 3,
                                       12.0 / 33.0, 2.0 / 3 * 3 / 11, 2.0 / 3 * 2 / 11};
    EXPECT_LT(max_abs_difference(pi, expected), 1e-12);
}

TEST_F(PerClass, WithoutAStartEachClassIsSolvedButNoMixtureIsClaimed) {
    const auto path = write(gamblers_ruin(6, 0.5), "ruin-nostart.h5");
    const auto report = solve_from(path, std::nullopt);
    EXPECT_FALSE(report.has_distribution);
    EXPECT_EQ(report.classes.size(), 2u);
    EXPECT_FALSE(report.classes[0].probability.has_value());
}

TEST_F(PerClass, SolveWithoutPerClassStopsWithExitThree) {
    const auto path = write(gamblers_ruin(6, 0.5), "ruin-stop.h5");
    try {
        (void)solve(path, "auto", 1e-10);
        ADD_FAILURE() << "expected a StructureError";
    } catch (const Error& e) {
        EXPECT_EQ(e.code(), ExitCode::no_unique);
        EXPECT_NE(std::string(e.what()).find("no unique stationary distribution"),
                  std::string::npos);
    }
}

} // namespace
} // namespace longrun

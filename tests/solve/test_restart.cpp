// Warm starts, checkpoints and resumption, and auto's fallback when its first
// method is made to fail. MPI: 1, 2 and 3 ranks.
#include "io/error.hpp"
#include "solve/strategy.hpp"
#include "support/mpi_fixture.hpp"
#include "support/test_chains.hpp"

#include <petscsys.h>

#include <algorithm>
#include <filesystem>

namespace longrun {
namespace {

// Options set for one test only, cleared on every rank however the test ends.
class ScopedOptions {
  public:
    explicit ScopedOptions(std::vector<std::pair<std::string, std::string>> options)
        : options_(std::move(options)) {
        for (const auto& [name, value] : options_)
            PetscOptionsSetValue(nullptr, name.c_str(), value.c_str());
    }
    ~ScopedOptions() {
        for (const auto& [name, value] : options_)
            PetscOptionsClearValue(nullptr, name.c_str());
    }

  private:
    std::vector<std::pair<std::string, std::string>> options_;
};

class Restart : public testing_support::MpiTest {
  protected:
    cli::SolveRequest request(const std::string& path, const std::string& method = "linear") {
        cli::SolveRequest r;
        r.chain_path = path;
        r.method = method;
        r.tolerance = 1e-12;
        r.progress = false;
        return r;
    }
    // The error code every rank saw (the job's verdict), or 0.
    static int exit_code_of(const std::function<void()>& job) {
        int code = 0;
        try {
            job();
        } catch (const Error& e) {
            code = static_cast<int>(e.code());
        }
        int worst = 0;
        MPI_Allreduce(&code, &worst, 1, MPI_INT, MPI_MAX, MPI_COMM_WORLD);
        return worst;
    }
    bool exists_everywhere(const std::string& path) {
        int here = std::filesystem::exists(path) ? 1 : 0, all = 0;
        MPI_Allreduce(&here, &all, 1, MPI_INT, MPI_MIN, MPI_COMM_WORLD);
        return all == 1;
    }
};

TEST_F(Restart, ResumingFromACheckpointGivesTheUninterruptedAnswer) {
    const auto path = write(testing_support::tandem(40, 40, 1.0, 1.1, 1.2), "tandem.h5");
    const auto whole = gather(cli::run_solve(MPI_COMM_WORLD, request(path)));

    // An iteration limit stands in for a crash or a scheduler's time limit.
    const std::string checkpoint = folder + "/ck.h5";
    auto interrupted = request(path);
    interrupted.checkpoint = checkpoint;
    interrupted.checkpoint_every = 0;
    {
        ScopedOptions limit({{"-linear_ksp_max_it", "2"}, {"-linear_pc_type", "none"}});
        EXPECT_EQ(exit_code_of([&] { cli::run_solve(MPI_COMM_WORLD, interrupted); }),
                  static_cast<int>(ExitCode::numerical));
    }
    ASSERT_TRUE(exists_everywhere(checkpoint));

    auto resumed = request(path);
    resumed.resume = checkpoint;
    const cli::SolveReport r = cli::run_solve(MPI_COMM_WORLD, resumed);
    EXPECT_NE(r.start_from.find("resumed from"), std::string::npos) << r.start_from;
    ASSERT_TRUE(r.certificate.meets(1e-12));
    // Both answers are certified to 1e-12; the residual bounds their distance
    // only loosely, so compare entries at a level well above round-off.
    EXPECT_LT(max_abs_difference(gather(r), whole), 1e-11);
}

// Every preconditioner of `linear` reaches the same certified answer (GTH on the
// same small tandem line is the reference, as in test_methods).
TEST_F(Restart, EveryLinearPreconditionerGivesTheSameAnswer) {
    const auto chain = testing_support::tandem(20, 15, 1.0, 1.1, 1.2);
    const auto path = write(chain, "tandem.h5");
    std::vector<double> reference;
    for (const auto* name : {"amg", "ilu", "asm", "lu"}) {
        auto r = request(path);
        r.preconditioner = solve::preconditioner_named(name);
        const cli::SolveReport report = cli::run_solve(MPI_COMM_WORLD, r);
        ASSERT_TRUE(report.certificate.meets(1e-12)) << name;
        const auto pi = gather(report);
        if (reference.empty())
            reference = pi;
        EXPECT_LT(max_abs_difference(pi, reference), 1e-11) << name;
    }
}

TEST_F(Restart, ResumeWithoutACheckpointStartsAfreshAndWritesOne) {
    const auto path = write(testing_support::tandem(30, 30, 1.0, 1.1, 1.2), "tandem.h5");
    auto r = request(path);
    r.resume = folder + "/not-yet.h5";
    r.checkpoint_every = 0;
    const cli::SolveReport report = cli::run_solve(MPI_COMM_WORLD, r);
    EXPECT_NE(report.start_from.find("started from the beginning"), std::string::npos);
    EXPECT_GT(report.checkpoints_written, 0);
    EXPECT_TRUE(exists_everywhere(folder + "/not-yet.h5"));
}

TEST_F(Restart, WarmStartFromTheAnswerItselfNeedsOnlyTheRefinementSteps) {
    const auto path = write(testing_support::birth_death(2, 50, 1.5, 1.0), "mm2.h5");
    auto first = request(path, "aggregation");
    first.output = folder + "/first.h5";
    const cli::SolveReport from_scratch = cli::run_solve(MPI_COMM_WORLD, first);
    const auto pi = gather(from_scratch);

    // A start carries no error estimate, so a method still runs from it, but
    // only for the few steps that give the estimate.
    auto again = request(path, "aggregation");
    again.tolerance = 1e-10;
    again.warm_start = folder + "/first.h5";
    const cli::SolveReport r = cli::run_solve(MPI_COMM_WORLD, again);
    ASSERT_EQ(r.attempts.size(), 1u);
    EXPECT_TRUE(r.attempts.front().met);
    EXPECT_LE(r.iterations, from_scratch.iterations);
    EXPECT_LT(max_abs_difference(gather(r), pi), 1e-12);
}

TEST_F(Restart, CheckpointOfAnotherChainIsRefusedAsBadInput) {
    const auto small = write(testing_support::birth_death(1, 20, 0.5, 1.0), "small.h5");
    const auto large = write(testing_support::birth_death(1, 30, 0.5, 1.0), "large.h5");
    const std::string checkpoint = folder + "/ck.h5";
    auto first = request(small);
    first.checkpoint = checkpoint;
    first.checkpoint_every = 0;
    {
        ScopedOptions limit({{"-linear_ksp_max_it", "1"}, {"-linear_pc_type", "none"}});
        (void)exit_code_of([&] { cli::run_solve(MPI_COMM_WORLD, first); });
    }
    ASSERT_TRUE(exists_everywhere(checkpoint));
    auto wrong = request(large);
    wrong.resume = checkpoint;
    EXPECT_EQ(exit_code_of([&] { cli::run_solve(MPI_COMM_WORLD, wrong); }),
              static_cast<int>(ExitCode::bad_input));
}

TEST_F(Restart, AutoFallsBackWhenItsFirstMethodsAreMadeToFail) {
    // M/M/1/K with K = 2,500 (over auto's limit for exact elimination, so
    // aggregation comes first, then linear); checked against the closed form
    // (Gross & Harris, Fundamentals of Queueing Theory, M/M/c/K with c = 1).
    const int K = 2500;
    const double lambda = 0.9, mu = 1.0;
    const auto path = write(testing_support::birth_death(1, K, lambda, mu), "mm1k.h5");
    ScopedOptions broken({{"-aggregation_max_cycles", "1"},
                          {"-linear_pc_type", "none"},
                          {"-linear_ksp_max_it", "1"}});
    const cli::SolveReport r = cli::run_solve(MPI_COMM_WORLD, request(path, "auto"));
    ASSERT_GE(r.attempts.size(), 3u);
    EXPECT_EQ(r.attempts[0].method, "aggregation");
    EXPECT_FALSE(r.attempts[0].met);
    EXPECT_EQ(r.attempts[1].method, "linear");
    EXPECT_FALSE(r.attempts[1].met);
    EXPECT_TRUE(r.attempts.back().met);
    EXPECT_NE(r.method, "aggregation");
    EXPECT_NE(r.method, "linear");
    // The residual (1e-12) bounds the error only up to the chain's conditioning,
    // which grows with K: agreement to 1e-10 is what the method list promises.
    EXPECT_LT(max_abs_difference(gather(r), testing_support::mmck_closed_form(1, K, lambda, mu)),
              1e-10);
}

} // namespace
} // namespace longrun

namespace longrun {
namespace {

// The decision rule itself (README, "How auto chooses").
TEST(AutoPlan, SmallChainsStartWithExactElimination) {
    solve::ChainTraits t;
    t.states = 500;
    EXPECT_EQ(solve::plan_for("auto", t).front(), "gth");
}

TEST(AutoPlan, LargeChainsStartWithAggregationAndEndWithEigen) {
    solve::ChainTraits t;
    t.states = 1'000'000;
    t.memory_per_rank_bytes = 24ull << 30;
    const auto plan = solve::plan_for("auto", t);
    EXPECT_EQ(plan.front(), "aggregation");
    EXPECT_EQ(plan.back(), "eigen");
    EXPECT_NE(std::find(plan.begin(), plan.end(), "direct"), plan.end());
}

TEST(AutoPlan, NoSparseLuWhenTheMemoryEstimateIsTooLarge) {
    solve::ChainTraits t;
    t.states = 1'000'000;
    t.memory_per_rank_bytes = 1ull << 30;
    std::string why;
    const auto plan = solve::plan_for("auto", t, &why);
    EXPECT_EQ(std::find(plan.begin(), plan.end(), "direct"), plan.end());
    EXPECT_NE(why.find("skipped"), std::string::npos) << why;
}

TEST(AutoPlan, NearlyDecomposableChainsPutKrylovMethodsLast) {
    solve::ChainTraits t;
    t.states = 100'000;
    t.nearly_decomposable = true;
    const auto plan = solve::plan_for("auto", t);
    ASSERT_GE(plan.size(), 3u);
    EXPECT_EQ(plan.front(), "aggregation");
    EXPECT_EQ(plan[plan.size() - 2], "linear");
    EXPECT_EQ(plan.back(), "eigen");
}

TEST(AutoPlan, ListsAreTriedInTheGivenOrderAndUnknownNamesRefused) {
    EXPECT_EQ(solve::plan_for("direct,linear", {}), (std::vector<std::string>{"direct", "linear"}));
    EXPECT_THROW(solve::plan_for("linear,fastest", {}), UsageError);
}

} // namespace
} // namespace longrun

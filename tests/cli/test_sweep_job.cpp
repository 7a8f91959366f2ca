// The sweep job called as a library on 1 and 2 ranks: an M/M/1/K queue (K = 10,
// service rate 1) swept over its arrival rate, checked against the closed form
// at every point; the --until crossing against the closed-form root; warm
// starts; and job-array points gathered into the same table as one run.
#include "cli/sweep_job.hpp"
#include "cli/sweep_output.hpp"
#include "io/error.hpp"
#include "support/mpi_fixture.hpp"

#include <cmath>
#include <filesystem>
#include <fstream>
#include <functional>

namespace longrun {
namespace {

using testing_support::MpiTest;

constexpr int K = 10;
constexpr double mu = 1.0;

// M/M/1/K with rho = lambda/mu: P(N = n) = (1 - rho) rho^n / (1 - rho^(K+1)), and
// 1/(K+1) for every n when rho = 1 (Gross & Harris, Fundamentals of Queueing
// Theory, section "Finite queue M/M/1/K").
double p_n(double lambda, int n) {
    const double rho = lambda / mu;
    if (std::abs(rho - 1) < 1e-12)
        return 1.0 / (K + 1);
    return (1 - rho) * std::pow(rho, n) / (1 - std::pow(rho, K + 1));
}
double p_full(double lambda) {
    return p_n(lambda, K);
}
double mean_queue(double lambda) {
    double m = 0;
    for (int n = 0; n <= K; ++n)
        m += n * p_n(lambda, n);
    return m;
}

// Root of P(N = K) = target: P(N = K) increases with rho (same source: the
// blocking probability grows with the load), so bisection on a bracket works.
double root_of(const std::function<double(double)>& f, double target, double lo, double hi) {
    for (int i = 0; i < 200; ++i) {
        const double mid = 0.5 * (lo + hi);
        (f(mid) < target ? lo : hi) = mid;
    }
    return 0.5 * (lo + hi);
}

class SweepJob : public MpiTest {
  protected:
    // The M/M/1/K model shared with the end-to-end and batch-job tests (K = 10),
    // copied so that the sweep's files stay in the scratch folder.
    std::string model_path() {
        const std::string path = folder + "/mm1k.yaml";
        if (rank == 0)
            std::filesystem::copy_file(LONGRUN_MM1K_MODEL, path,
                                       std::filesystem::copy_options::overwrite_existing);
        MPI_Barrier(MPI_COMM_WORLD);
        return path;
    }
    cli::SweepRequest request(const std::string& vary) {
        cli::SweepRequest r;
        r.model_path = model_path();
        r.axis = cli::parse_vary(vary);
        r.tails = {"full=queue==10"};
        r.quantiles = {"queue:0.9"};
        r.work_folder = folder + "/work";
        r.tolerance = 1e-12;
        return r;
    }
};

TEST_F(SweepJob, EveryPointCarriesItsErrorBoundAndMarksWhatItLeavesUnresolved) {
    auto r = request("arrival=0.3,0.5");
    r.method = "power";
    r.tolerance = 1e-4;
    const auto table = cli::run_sweep(MPI_COMM_WORLD, r);
    ASSERT_EQ(table.rows.size(), 2u);
    for (const auto& row : table.rows) {
        ASSERT_TRUE(row.error_bound) << row.value;
        EXPECT_GT(*row.error_bound, 0);
        EXPECT_LE(*row.error_bound, 0.5e-4) << row.value;
        EXPECT_LE(std::abs(*row.cell("P(full)") - p_full(row.value)), *row.error_bound)
            << row.value;
    }
    // P(full) at rho = 0.3 is 0.7 0.3^10 / (1 - 0.3^11) ~ 4.1e-6: unresolved when the
    // point's estimate exceeds it.
    const bool low_unresolved = p_full(0.3) < 2 * *table.rows[0].error_bound;
    // At rho = 0.5 it is ~4.9e-4, above 2 * 0.5e-4: resolved whatever the estimate.
    const std::string text = cli::sweep_text(table);
    EXPECT_NE(text.find("error_bound"), std::string::npos) << text;
    EXPECT_EQ(text.find("e-06?") != std::string::npos, low_unresolved) << text;
    const auto second = text.find("\n    0.5 ");
    ASSERT_NE(second, std::string::npos) << text;
    EXPECT_EQ(text.substr(second + 1, text.find('\n', second + 1) - second - 1).find('?'),
              std::string::npos)
        << text;
    if (low_unresolved) {
        // 4.1e-6 / 10: the largest power of ten below is 1e-7.
        EXPECT_NE(text.find("--tol 1e-07 resolves every marked cell"), std::string::npos) << text;
    }
    const std::string csv = cli::sweep_csv(table);
    EXPECT_EQ(csv.substr(0, csv.find('\n')).find("arrival,states,method,residual,error_bound,"), 0u)
        << csv;
    const auto json = cli::sweep_json(table);
    EXPECT_EQ(json["rows"][0]["error_bound"].get<double>(), *table.rows[0].error_bound);
    EXPECT_EQ(json["rows"][0]["unresolved"].size(), low_unresolved ? 1u : 0u);
    EXPECT_EQ(json["rows"][1]["unresolved"].size(), 0u);
}

TEST_F(SweepJob, ClosedFormAtEveryPointAndWarmStarts) {
    auto r = request("arrival=0.5:1.5:0.25"); // includes rho = 1
    const auto table = cli::run_sweep(MPI_COMM_WORLD, r);
    ASSERT_EQ(table.rows.size(), 5u);
    for (const char* column :
         {"mean(queue)", "q0.9(queue)", "P(full)", "rate(arrive)", "rate(leave)"})
        EXPECT_NE(std::find(table.columns.begin(), table.columns.end(), column),
                  table.columns.end())
            << column;
    for (std::size_t i = 0; i < table.rows.size(); ++i) {
        const auto& row = table.rows[i];
        const double lambda = 0.5 + 0.25 * static_cast<double>(i);
        EXPECT_DOUBLE_EQ(row.value, lambda);
        EXPECT_EQ(row.states, std::uint64_t(K + 1));
        EXPECT_LE(row.residual, 1e-12) << row.method;
        EXPECT_NEAR(*row.cell("P(full)"), p_full(lambda), 1e-9 * p_full(lambda)) << lambda;
        EXPECT_NEAR(*row.cell("mean(queue)"), mean_queue(lambda), 1e-9) << lambda;
        // Throughput: admitted arrivals lambda (1 - P(K)) equal departures
        // mu (1 - P(0)) (same source, effective arrival rate of M/M/1/K).
        EXPECT_NEAR(*row.cell("rate(arrive)"), lambda * (1 - p_full(lambda)), 1e-9) << lambda;
        EXPECT_NEAR(*row.cell("rate(leave)"), mu * (1 - p_n(lambda, 0)), 1e-9) << lambda;
        // Same state space at every point: each solve after the first starts warm.
        EXPECT_EQ(row.warm, i > 0) << i;
        EXPECT_EQ(row.start.find("warm start") != std::string::npos, i > 0) << row.start;
    }
    // The points' files go as the sweep goes.
    EXPECT_FALSE(std::filesystem::exists(r.work_folder));
}

TEST_F(SweepJob, UntilCrossingMatchesClosedFormRoot) {
    const double step = 0.1;
    auto r = request("arrival=0.5:1.5:0.1");
    r.until = cli::parse_until("P(full) > 0.05");
    const auto table = cli::run_sweep(MPI_COMM_WORLD, r);
    const double root = root_of(p_full, 0.05, 0.5, 1.5);
    // The sweep stops at the first grid value above the root.
    const double first_above = 0.5 + step * std::ceil((root - 0.5) / step);
    ASSERT_TRUE(table.crossing.crossed) << table.crossing.sentence;
    ASSERT_TRUE(table.crossing.interpolated && table.crossing.before && table.crossing.at);
    EXPECT_NEAR(table.rows.back().value, first_above, 1e-12);
    EXPECT_EQ(*table.crossing.at, table.rows.size() - 1);
    const double x0 = table.rows[*table.crossing.before].value;
    const double x1 = table.rows[*table.crossing.at].value;
    EXPECT_NEAR(x1 - x0, step, 1e-12);
    EXPECT_LT(x0, root);
    EXPECT_GT(x1, root);

    // Bound on the interpolated root xi (common practice: the error of linear
    // interpolation, f(x) - L(x) = f''(s)/2 (x - x0)(x - x1) for some s in
    // [x0, x1]). L(xi) = 0.05 = f(root), so |f(xi) - f(root)| <= (xi - x0)(x1 - xi)/2
    // max|f''|, and by the mean value theorem |xi - root| <= that / min|f'|. f' and
    // f'' of the closed form by central differences on a fine grid of [x0, x1].
    double max_f2 = 0, min_f1 = INFINITY;
    const double d = 1e-4;
    for (int k = 0; k <= 400; ++k) {
        const double x = x0 + (x1 - x0) * k / 400.0;
        const double f1 = (p_full(x + d) - p_full(x - d)) / (2 * d);
        const double f2 = (p_full(x + d) - 2 * p_full(x) + p_full(x - d)) / (d * d);
        max_f2 = std::max(max_f2, std::abs(f2));
        min_f1 = std::min(min_f1, std::abs(f1));
    }
    const double xi = *table.crossing.interpolated;
    ASSERT_GT(xi, x0);
    ASSERT_LT(xi, x1);
    const double bound = (xi - x0) * (x1 - xi) / 2 * max_f2 / min_f1;
    // Slack for the finite differences and the solves (residual 1e-12).
    EXPECT_LE(std::abs(xi - root), 1.01 * bound + 1e-7)
        << "interpolated " << xi << ", root " << root << ", bound " << bound;
    // Interpolating must beat reading off the nearer grid value.
    EXPECT_LT(std::abs(xi - root), std::min(root - x0, x1 - root));
    EXPECT_NE(table.crossing.sentence.find("crossed between arrival=0.8 and 0.9"),
              std::string::npos)
        << table.crossing.sentence;
}

// The capacity swept: the state space changes size, so those points start cold
// (a warm start needs the same states) instead of failing; a repeated size starts warm.
TEST_F(SweepJob, StateSpaceChangesSizeStartsCold) {
    const std::string path = folder + "/capacity.yaml";
    if (rank == 0)
        std::ofstream(path) << R"(kind: ctmc
parameters: {arrival: 0.5, service: 1.0, capacity: 4}
variables:
  queue: {from: 0, to: capacity}
start: {queue: 0}
events:
  - name: arrive
    when: "queue < capacity"
    rate: arrival
    then: {queue: "queue + 1"}
  - name: leave
    when: "queue > 0"
    rate: service
    then: {queue: "queue - 1"}
)";
    MPI_Barrier(MPI_COMM_WORLD);
    cli::SweepRequest r;
    r.model_path = path;
    r.axis = cli::parse_vary("capacity=3,5,5");
    r.tails = {"full=queue==capacity"};
    r.work_folder = folder + "/work";
    r.tolerance = 1e-12;
    const auto table = cli::run_sweep(MPI_COMM_WORLD, r);
    ASSERT_EQ(table.rows.size(), 3u);
    const bool expected_warm[] = {false, false, true};
    for (std::size_t i = 0; i < 3; ++i) {
        const auto& row = table.rows[i];
        const int k = static_cast<int>(row.value);
        EXPECT_EQ(row.states, std::uint64_t(k + 1));
        EXPECT_EQ(row.warm, expected_warm[i]) << i;
        // M/M/1/K blocking probability (Gross & Harris, as above) with K = capacity.
        const double rho = 0.5;
        const double blocking = (1 - rho) * std::pow(rho, k) / (1 - std::pow(rho, k + 1));
        EXPECT_NEAR(*row.cell("P(full)"), blocking, 1e-9 * blocking) << k;
    }
}

TEST_F(SweepJob, NeverCrossedIsNoError) {
    auto r = request("arrival=0.2,0.3");
    r.until = cli::parse_until("P(full) >= 0.5");
    const auto table = cli::run_sweep(MPI_COMM_WORLD, r);
    EXPECT_EQ(table.rows.size(), 2u);
    EXPECT_FALSE(table.crossing.crossed);
    EXPECT_NE(table.crossing.sentence.find("never held"), std::string::npos);
}

TEST_F(SweepJob, OnlyAndGatherGiveTheSameTable) {
    auto r = request("arrival=0.5:1.5:0.25");
    r.until = cli::parse_until("P(full) > 0.05");
    const auto whole = cli::run_sweep(MPI_COMM_WORLD, r);
    const std::string prefix = folder + "/array";
    for (std::size_t i = 0; i < r.axis.values.size(); ++i) {
        auto one = r;
        one.only = i;
        const auto point = cli::run_sweep(MPI_COMM_WORLD, one);
        EXPECT_EQ(point.rows.size(), 1u);
        EXPECT_FALSE(point.rows.front().warm);
        if (rank == 0)
            cli::write_point_file(prefix, point);
    }
    MPI_Barrier(MPI_COMM_WORLD);
    if (rank == 0) { // serial, and no collective call follows in this test body
        const auto gathered = cli::gather_point_files(prefix);
        EXPECT_EQ(gathered.columns, whole.columns);
        EXPECT_EQ(gathered.rows.size(), whole.rows.size());
        for (std::size_t i = 0; i < std::min(gathered.rows.size(), whole.rows.size()); ++i) {
            const auto &a = gathered.rows[i], &b = whole.rows[i];
            EXPECT_EQ(a.value, b.value);
            EXPECT_EQ(a.states, b.states);
            for (const auto& c : whole.columns)
                EXPECT_NEAR(*a.cell(c), *b.cell(c), 1e-10 * std::max(1.0, std::abs(*b.cell(c))))
                    << c << " at " << a.value;
        }
        EXPECT_EQ(gathered.crossing.sentence, whole.crossing.sentence);
        EXPECT_EQ(cli::sweep_csv(gathered).substr(0, 40), cli::sweep_csv(whole).substr(0, 40));

        // A missing point before the crossing is named.
        std::filesystem::remove(cli::point_file_name(prefix, 1));
        try {
            (void)cli::gather_point_files(prefix);
            ADD_FAILURE() << "no error for a missing point";
        } catch (const Error& e) {
            EXPECT_EQ(e.code(), ExitCode::bad_input);
            EXPECT_NE(std::string(e.what()).find("points 1 of 0..4"), std::string::npos)
                << e.what();
        }
    }
}

template <class F>
ExitCode code_of(F&& f) {
    try {
        f();
    } catch (const Error& e) {
        return e.code();
    }
    return ExitCode::ok;
}

TEST_F(SweepJob, BadInputIsUsageError) {
    for (const char* bad :
         {"arrival", "arrival=1:2", "arrival=2:1:0.5", "arrival=1:2:0", "arrival=1,x", "=1,2"})
        EXPECT_EQ(code_of([&] { (void)cli::parse_vary(bad); }), ExitCode::usage) << bad;
    for (const char* bad : {"P(full)", "P(full) > x", "> 0.1", "P(full) == 0.1"})
        EXPECT_EQ(code_of([&] { (void)cli::parse_until(bad); }), ExitCode::usage) << bad;
    const auto c = cli::parse_until("P(load>=4) <= 0.5");
    EXPECT_EQ(c.column, "P(load>=4)");
    EXPECT_EQ(c.relation, "<=");

    // Both refused on every rank before anything is generated.
    auto r = request("lambda=1,2");
    EXPECT_EQ(code_of([&] { (void)cli::run_sweep(MPI_COMM_WORLD, r); }), ExitCode::usage);
    r = request("arrival=1,2");
    r.until = cli::parse_until("P(empty) > 0.1");
    EXPECT_EQ(code_of([&] { (void)cli::run_sweep(MPI_COMM_WORLD, r); }), ExitCode::usage);
    r.until.reset();
    r.only = 2;
    EXPECT_EQ(code_of([&] { (void)cli::run_sweep(MPI_COMM_WORLD, r); }), ExitCode::usage);
}

} // namespace
} // namespace longrun

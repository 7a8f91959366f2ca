// The summary library (measures, tail masses, quantiles, conditional means,
// event rates, likely states) against closed forms from queueing theory. The
// stationary vectors are exact closed forms split over the ranks as the chain
// reader would split them, so that these tests judge the summary and not a
// solver; one test solves for real and then summarizes. Runs under mpirun with
// 1, 2 and 3 ranks; every rank makes every collective call before any check.
#include "chain_slice.hpp"
#include "support/mpi_fixture.hpp"
#include "support/test_chains.hpp"

#include "cli/load.hpp"
#include "io/error.hpp"
#include "summary/event_rates.hpp"
#include "summary/likely_states.hpp"
#include "summary/measure_summary.hpp"
#include "summary/state_table.hpp"

#include <algorithm>
#include <cmath>
#include <numeric>
#include <tuple>

namespace longrun {
namespace {

using testing_support::even_rows;
using testing_support::MpiTest;
using testing_support::part;
using testing_support::rows_without_first_rank;
using testing_support::slice;

const std::vector<double> standard_levels = {0.5, 0.9, 0.99, 0.999};

double factorial(int n) {
    double f = 1;
    for (int k = 2; k <= n; ++k)
        f *= k;
    return f;
}

struct Transition {
    std::uint64_t target;
    double weight;
    std::uint16_t label;
};

// A whole chain with labelled transitions, rows given in state order and each
// row's transitions by increasing target (the file format's order).
io::Chain labelled_chain(io::ChainKind kind, const std::vector<std::vector<Transition>>& rows,
                         std::vector<std::string> names) {
    io::Chain c;
    c.kind = kind;
    c.states = rows.size();
    c.rows = {0, rows.size()};
    for (const auto& row : rows) {
        for (const auto& t : row) {
            c.targets.push_back(t.target);
            c.weights.push_back(t.weight);
            c.events.push_back(t.label);
        }
        c.offsets.push_back(c.targets.size());
    }
    c.transitions = c.targets.size();
    c.event_names = std::move(names);
    return c;
}

class SummaryTest : public MpiTest {
  protected:
    static bool on_every_rank(bool local) {
        int ok = local ? 1 : 0;
        MPI_Allreduce(MPI_IN_PLACE, &ok, 1, MPI_INT, MPI_MIN, MPI_COMM_WORLD);
        return ok == 1;
    }
};

// ---------------------------------------------------------------- M/M/c/K

// M/M/3/40 with lambda = 2.5, mu = 1 (a = 2.5, r = a/c = 5/6).
constexpr int mmck_c = 3, mmck_k = 40;
constexpr double mmck_lambda = 2.5, mmck_mu = 1.0;

// Gross & Harris, Fundamentals of Queueing Theory, M/M/c/K: p_0, and for n >= c
// p_n = a^n / (c! c^(n-c)) p_0, so the tail is a finite geometric sum:
// P(N >= k) = p_0 a^c / c! r^(k-c) (1 - r^(K-k+1)) / (1 - r) for c <= k <= K.
struct MmckClosedForm {
    double a = mmck_lambda / mmck_mu, r = a / mmck_c, p0 = 0;
    MmckClosedForm() {
        double s = 0;
        for (int n = 0; n < mmck_c; ++n)
            s += std::pow(a, n) / factorial(n);
        s += std::pow(a, mmck_c) / factorial(mmck_c) * (1 - std::pow(r, mmck_k - mmck_c + 1)) /
             (1 - r);
        p0 = 1 / s;
    }
    double p(int n) const {
        return n < mmck_c ? p0 * std::pow(a, n) / factorial(n)
                          : p0 * std::pow(a, n) /
                                (factorial(mmck_c) * std::pow(double(mmck_c), n - mmck_c));
    }
    double tail(int k) const {
        if (k < mmck_c) {
            double below = 0;
            for (int n = 0; n < k; ++n)
                below += p(n);
            return 1 - below;
        }
        return p0 * std::pow(a, mmck_c) / factorial(mmck_c) * std::pow(r, k - mmck_c) *
               (1 - std::pow(r, mmck_k - k + 1)) / (1 - r);
    }
    // Mean queue length Lq (Gross & Harris, M/M/c/K).
    double lq() const {
        const int m = mmck_k - mmck_c;
        return p0 * std::pow(a, mmck_c) * r / (factorial(mmck_c) * (1 - r) * (1 - r)) *
               (1 - std::pow(r, m + 1) - (1 - r) * (m + 1) * std::pow(r, m));
    }
    // Mean number in system L = Lq + lambda_eff / mu (Little's law, same source).
    double l() const { return lq() + a * (1 - p(mmck_k)); }
};

TEST_F(SummaryTest, MmckTailQuantilesMomentsAndQueueLength) {
    io::Chain whole = testing_support::birth_death(mmck_c, mmck_k, mmck_lambda, mmck_mu);
    whole.parameters = {{"servers", double(mmck_c)}};
    const auto pi = testing_support::mmck_closed_form(mmck_c, mmck_k, mmck_lambda, mmck_mu);
    const RowRange rows = even_rows(whole.states, MPI_COMM_WORLD);
    const auto chain = slice(whole, rows);
    const auto local_pi = part(pi, rows);

    summary::StateTable table(chain);
    const auto n = summary::summarize_measure(MPI_COMM_WORLD, "n", "state variable",
                                              table.column("n"), local_pi, standard_levels, {});
    const auto waiting = table.evaluate("max(n-servers,0)", "--measure waiting=max(n-servers,0)");
    const auto queue =
        summary::summarize_measure(MPI_COMM_WORLD, "waiting", "--measure waiting=max(n-servers,0)",
                                   waiting, local_pi, standard_levels, {});

    const MmckClosedForm g;
    EXPECT_TRUE(n.integral);
    EXPECT_FALSE(n.binned);
    ASSERT_EQ(n.values.size(), std::size_t(mmck_k + 1));
    for (int k = 0; k <= mmck_k; ++k) {
        EXPECT_EQ(n.values[k], k);
        // Tail summed from the top: a tail taken as 1 - P(N < k) would lose the
        // relative accuracy of the small masses near K (and fail here at k = K).
        EXPECT_NEAR(n.tail[k], g.tail(k), 1e-13 * g.tail(k)) << "P(N >= " << k << ")";
        EXPECT_NEAR(n.pmf[k], g.p(k), 1e-13 * g.p(k)) << "P(N = " << k << ")";
    }
    // Smallest x with P(N <= x) >= level, computed with exact rationals (python3
    // fractions) from the Gross & Harris pmf: the cumulative sums at 3, 12, 24, 35
    // are 0.415, 0.887, 0.98796, 0.99898, one step below each level. A quantile
    // taken as the smallest x with P(N < x) >= level gives 5, 14, 26, 37.
    ASSERT_EQ(n.quantiles.size(), 4u);
    EXPECT_EQ(n.quantiles[0].value, 4);
    EXPECT_EQ(n.quantiles[1].value, 13);
    EXPECT_EQ(n.quantiles[2].value, 25);
    EXPECT_EQ(n.quantiles[3].value, 36);
    EXPECT_EQ(n.quantiles[3].level, 0.999);
    // L = Lq + a (1 - p_K) (Gross & Harris); L = 5.983703841668385.
    EXPECT_NEAR(n.mean, g.l(), 1e-12);
    EXPECT_NEAR(n.mean, 5.983703841668385, 1e-12);
    // Population std from the same pmf (python3 fractions: sqrt(E[N^2] - L^2));
    // the sample (n-1) formula has no meaning here and a std about the wrong
    // mean would be larger.
    EXPECT_NEAR(n.std, 5.426700776777653, 1e-11);
    // Lq = 3.484048089784642 (Gross & Harris, M/M/c/K mean queue length).
    EXPECT_NEAR(queue.mean, g.lq(), 1e-12);
    EXPECT_NEAR(queue.mean, 3.484048089784642, 1e-12);
    EXPECT_TRUE(queue.integral);
    EXPECT_EQ(queue.values.front(), 0);
    EXPECT_EQ(queue.values.back(), mmck_k - mmck_c);
    // P(waiting >= 1) = P(N >= c + 1).
    EXPECT_NEAR(queue.tail[1], g.tail(mmck_c + 1), 1e-13);
}

TEST_F(SummaryTest, ConditionalMeanProbabilityAndLogicalOperators) {
    io::Chain whole = testing_support::birth_death(mmck_c, mmck_k, mmck_lambda, mmck_mu);
    whole.parameters = {{"servers", double(mmck_c)}};
    const auto pi = testing_support::mmck_closed_form(mmck_c, mmck_k, mmck_lambda, mmck_mu);
    const RowRange rows = rows_without_first_rank(whole.states, MPI_COMM_WORLD);
    const auto local_pi = part(pi, rows);
    summary::StateTable table(slice(whole, rows));

    std::vector<summary::Condition> given = {
        {"n>=servers", table.evaluate("n>=servers", "--given n>=servers")},
        {"n>40", table.evaluate("n>40", "--given n>40")},
    };
    const auto n = summary::summarize_measure(MPI_COMM_WORLD, "n", "state variable",
                                              table.column("n"), local_pi, {}, given);
    const double mixed = summary::probability_of(
        MPI_COMM_WORLD, table.evaluate("n>=3 && n<=5 || n==0", "--tail mixed"), local_pi);
    const double full =
        summary::probability_of(MPI_COMM_WORLD, table.evaluate("n==40", "--tail n==40"), local_pi);

    const MmckClosedForm g;
    // E[N | N >= c] as a direct sum over the Gross & Harris pmf: sum_{n>=c} n p_n /
    // P(N >= c) = 7.962733212856218 (python3 fractions). The unconditional mean
    // (5.98) or dividing by 1 instead of P(N >= c) (5.59) would fail.
    double num = 0;
    for (int k = mmck_c; k <= mmck_k; ++k)
        num += k * g.p(k);
    ASSERT_EQ(n.given.size(), 2u);
    EXPECT_EQ(n.given[0].condition, "n>=servers");
    EXPECT_NEAR(n.given[0].probability, g.tail(mmck_c), 1e-13);
    ASSERT_TRUE(n.given[0].mean.has_value());
    EXPECT_NEAR(*n.given[0].mean, num / g.tail(mmck_c), 1e-12);
    EXPECT_NEAR(*n.given[0].mean, 7.962733212856218, 1e-12);
    // An impossible condition has probability 0 and no conditional mean.
    EXPECT_EQ(n.given[1].probability, 0);
    EXPECT_FALSE(n.given[1].mean.has_value());
    // muparser precedence: && binds tighter than ||.
    EXPECT_NEAR(mixed, g.p(0) + g.p(3) + g.p(4) + g.p(5), 1e-14);
    EXPECT_NEAR(full, g.p(mmck_k), 1e-16);
    EXPECT_TRUE(n.quantiles.empty());
}

TEST_F(SummaryTest, BoundMassesAtDeclaredBounds) {
    const io::Chain whole = testing_support::birth_death(mmck_c, mmck_k, mmck_lambda, mmck_mu);
    const auto pi = testing_support::mmck_closed_form(mmck_c, mmck_k, mmck_lambda, mmck_mu);
    const RowRange rows = even_rows(whole.states, MPI_COMM_WORLD);
    const auto chain = slice(whole, rows);
    const auto local_pi = part(pi, rows);
    const auto& n = chain.variables.front();
    auto record = summary::summarize_measure(MPI_COMM_WORLD, "n", "state variable", n.values,
                                             local_pi, {}, {});
    summary::add_bound_masses(MPI_COMM_WORLD, record, n.values, local_pi, n.lower, n.upper);
    const MmckClosedForm g;
    ASSERT_TRUE(record.mass_at_lower && record.mass_at_upper);
    EXPECT_EQ(*record.lower_bound, 0);
    EXPECT_EQ(*record.upper_bound, mmck_k);
    EXPECT_NEAR(*record.mass_at_lower, g.p0, 1e-15);        // Gross & Harris p_0
    EXPECT_NEAR(*record.mass_at_upper, g.p(mmck_k), 1e-16); // blocking probability p_K
}

// ---------------------------------------------------------------- Erlang loss

// M/M/5/5 with a = lambda/mu = 3: Erlang's loss formula B(5, 3) =
// (3^5/5!) / sum_{k<=5} 3^k/k! = 2.025/18.4 = 0.110054347826087 (Gross & Harris,
// M/M/c/c; Kleinrock, Queueing Systems vol. 1).
constexpr int erlang_c = 5;
constexpr double erlang_lambda = 3.0, erlang_mu = 1.0;

double erlang_b_recursion() {
    // B(0) = 1, B(k) = a B(k-1) / (k + a B(k-1)) (same sources).
    double b = 1;
    for (int k = 1; k <= erlang_c; ++k)
        b = erlang_lambda / erlang_mu * b / (k + erlang_lambda / erlang_mu * b);
    return b;
}

TEST_F(SummaryTest, ErlangLossFromEventIntensities) {
    io::Chain whole = testing_support::birth_death(erlang_c, erlang_c, erlang_lambda, erlang_mu);
    io::Measure arrive{"arrive", {}}, depart{"depart", {}};
    for (int n = 0; n <= erlang_c; ++n) {
        arrive.values.push_back(erlang_lambda); // fires in every state, lost when n = c
        depart.values.push_back(n * erlang_mu);
    }
    whole.event_intensities = {arrive, depart};
    // Truncated Poisson: the M/M/c/c stationary law (Erlang).
    const auto pi = testing_support::mmck_closed_form(erlang_c, erlang_c, erlang_lambda, erlang_mu);
    const RowRange rows = rows_without_first_rank(whole.states, MPI_COMM_WORLD);
    const auto chain = slice(whole, rows);
    const auto local_pi = part(pi, rows);

    summary::StateTable table(chain);
    const double all_busy = summary::probability_of(
        MPI_COMM_WORLD, table.evaluate("n==5", "--tail full=n==5"), local_pi);
    const auto rates = summary::event_rates(MPI_COMM_WORLD, chain, local_pi);
    const auto lost = summary::derived_rate("lost=arrive-depart", rates);
    const auto fraction = summary::derived_rate("lost_fraction = 1 - depart/arrive", rates);

    const double b = erlang_b_recursion();
    EXPECT_NEAR(b, 0.110054347826087, 1e-15);
    // PASTA: the fraction of arrivals lost is the time fraction with all c busy.
    EXPECT_NEAR(all_busy, b, 1e-15);
    ASSERT_EQ(rates.size(), 2u);
    EXPECT_EQ(rates[0].name, "arrive");
    EXPECT_EQ(rates[0].source, "event intensities");
    // Arrivals fire at lambda in every state, lost ones included: a rate from
    // transitions alone would give lambda (1 - B).
    EXPECT_NEAR(rates[0].rate, erlang_lambda, 1e-14);
    // Carried load: throughput = lambda (1 - B).
    EXPECT_NEAR(rates[1].rate, erlang_lambda * (1 - b), 1e-14);
    // Loss rate = lambda B.
    EXPECT_EQ(lost.name, "lost");
    EXPECT_EQ(lost.expression, "arrive-depart");
    EXPECT_EQ(lost.source, "--rate");
    EXPECT_NEAR(lost.rate, erlang_lambda * b, 1e-14);
    EXPECT_EQ(fraction.name, "lost_fraction");
    EXPECT_NEAR(fraction.rate, b, 1e-14);
    EXPECT_EQ(summary::rate_unit(chain.kind), "per unit time");
}

TEST_F(SummaryTest, ErlangLossFromLabelledTransitionsOfTheUniformisedChain) {
    // The same system as a dtmc by uniformisation with Lambda = lambda + c mu (a
    // step is one tick of a Poisson clock of rate Lambda; same stationary law): a
    // lost arrival is a self-loop labelled "lost", idle servers' ticks "idle".
    const double uniform = erlang_lambda + erlang_c * erlang_mu;
    enum : std::uint16_t { arrive, depart, lost, idle };
    std::vector<std::vector<Transition>> rows(erlang_c + 1);
    for (int n = 0; n <= erlang_c; ++n) {
        auto& row = rows[n];
        if (n > 0)
            row.push_back({std::uint64_t(n - 1), n * erlang_mu / uniform, depart});
        if (n < erlang_c)
            row.push_back({std::uint64_t(n), (erlang_c - n) * erlang_mu / uniform, idle});
        else
            row.push_back({std::uint64_t(n), erlang_lambda / uniform, lost});
        if (n < erlang_c)
            row.push_back({std::uint64_t(n + 1), erlang_lambda / uniform, arrive});
    }
    const auto whole =
        labelled_chain(io::ChainKind::dtmc, rows, {"arrive", "depart", "lost", "idle"});
    const auto pi = testing_support::mmck_closed_form(erlang_c, erlang_c, erlang_lambda, erlang_mu);
    const RowRange range = even_rows(whole.states, MPI_COMM_WORLD);
    const auto rates = summary::event_rates(MPI_COMM_WORLD, slice(whole, range), part(pi, range));

    const double b = erlang_b_recursion();
    ASSERT_EQ(rates.size(), 4u); // every label, in label order
    EXPECT_EQ(rates[2].name, "lost");
    EXPECT_EQ(rates[2].source, "transition labels");
    // Per step; times Lambda steps per unit time: lambda B and lambda (1 - B).
    EXPECT_NEAR(rates[2].rate * uniform, erlang_lambda * b, 1e-14);
    EXPECT_NEAR(rates[0].rate * uniform, erlang_lambda * (1 - b), 1e-14);
    EXPECT_NEAR(rates[1].rate * uniform, erlang_lambda * (1 - b), 1e-14);
    // The four labels share every step: their rates per step add up to 1.
    EXPECT_NEAR(rates[0].rate + rates[1].rate + rates[2].rate + rates[3].rate, 1, 1e-14);
    EXPECT_EQ(summary::rate_unit(io::ChainKind::dtmc), "per step");
}

// ---------------------------------------------------------------- Gordon-Newell

// Closed cyclic network of two exponential stations, N = 6 customers, mu1 = 2,
// mu2 = 3; state n1 = customers at station 1. Product form pi(n1) ~
// (1/mu1)^n1 (1/mu2)^(N - n1), throughput mu1 P(n1 > 0) = G(N-1)/G(N)
// (Gordon & Newell 1967, "Closed queuing systems with exponential servers",
// Operations Research 15(2)); G(N-1)/G(N) = 1.9378338999514328 (python3).
constexpr int gn_customers = 6;
constexpr double gn_mu1 = 2, gn_mu2 = 3;

double gn_normaliser(int customers) {
    double g = 0;
    for (int n1 = 0; n1 <= customers; ++n1)
        g += std::pow(1 / gn_mu1, n1) * std::pow(1 / gn_mu2, customers - n1);
    return g;
}

io::Chain cyclic_network() {
    enum : std::uint16_t { serve1, serve2 };
    std::vector<std::vector<Transition>> rows(gn_customers + 1);
    for (int n1 = 0; n1 <= gn_customers; ++n1) {
        if (n1 > 0)
            rows[n1].push_back({std::uint64_t(n1 - 1), gn_mu1, serve1});
        if (n1 < gn_customers)
            rows[n1].push_back({std::uint64_t(n1 + 1), gn_mu2, serve2});
    }
    auto chain = labelled_chain(io::ChainKind::ctmc, rows, {"serve1", "serve2"});
    io::StateVariable v{"n1", true, {}, 0.0, double(gn_customers)};
    for (int n1 = 0; n1 <= gn_customers; ++n1)
        v.values.push_back(n1);
    chain.variables.push_back(v);
    return chain;
}

std::vector<double> gn_product_form() {
    std::vector<double> pi;
    for (int n1 = 0; n1 <= gn_customers; ++n1)
        pi.push_back(std::pow(1 / gn_mu1, n1) * std::pow(1 / gn_mu2, gn_customers - n1) /
                     gn_normaliser(gn_customers));
    return pi;
}

TEST_F(SummaryTest, CyclicNetworkThroughputFromLabels) {
    const auto whole = cyclic_network();
    const auto pi = gn_product_form();
    const RowRange rows = rows_without_first_rank(whole.states, MPI_COMM_WORLD);
    const auto rates = summary::event_rates(MPI_COMM_WORLD, slice(whole, rows), part(pi, rows));
    const double throughput = gn_normaliser(gn_customers - 1) / gn_normaliser(gn_customers);
    EXPECT_NEAR(throughput, 1.9378338999514328, 1e-14);
    ASSERT_EQ(rates.size(), 2u);
    // Weighting by the target's probability instead of the source's would give
    // mu1 P(n1 < N), a different number here.
    EXPECT_NEAR(rates[0].rate, throughput, 1e-14);
    // In a cycle both stations carry the same flow.
    EXPECT_NEAR(rates[1].rate, throughput, 1e-14);
}

TEST_F(SummaryTest, SolvedCyclicNetworkAndQueueSummarizeToTheClosedForms) {
    const auto network_path = write(cyclic_network(), "cyclic.h5");
    const auto network = solve(network_path, "auto", 1e-12);
    const auto network_slice =
        cli::load_chain(network_path, MPI_COMM_WORLD, io::ValidationOptions{}, network.rows);
    const auto rates = summary::event_rates(MPI_COMM_WORLD, network_slice.chain, network.local_pi);
    const auto n1 = summary::summarize_measure(MPI_COMM_WORLD, "n1", "state variable",
                                               network_slice.chain.variables.at(0).values,
                                               network.local_pi, standard_levels, {});

    const auto queue_path =
        write(testing_support::birth_death(mmck_c, mmck_k, mmck_lambda, mmck_mu), "mmck.h5");
    const auto queue = solve(queue_path, "auto", 1e-12);
    const auto queue_slice =
        cli::load_chain(queue_path, MPI_COMM_WORLD, io::ValidationOptions{}, queue.rows);
    summary::StateTable table(queue_slice.chain);
    const auto n =
        summary::summarize_measure(MPI_COMM_WORLD, "n", "state variable", table.column("n"),
                                   queue.local_pi, standard_levels, {});

    // Gordon & Newell: throughput G(N-1)/G(N); mean from the product form.
    const double throughput = gn_normaliser(gn_customers - 1) / gn_normaliser(gn_customers);
    const auto pi = gn_product_form();
    double mean_n1 = 0;
    for (int k = 0; k <= gn_customers; ++k)
        mean_n1 += k * pi[k];
    ASSERT_EQ(rates.size(), 2u);
    EXPECT_NEAR(rates[0].rate, throughput, 1e-9);
    EXPECT_NEAR(n1.mean, mean_n1, 1e-9);

    // Gross & Harris M/M/c/K: tail masses to the solver's accuracy, relative where
    // they are small, and the same quantiles as the exact vector.
    const MmckClosedForm g;
    ASSERT_EQ(n.tail.size(), std::size_t(mmck_k + 1));
    for (int k = 0; k <= mmck_k; ++k)
        EXPECT_NEAR(n.tail[k], g.tail(k), 1e-8 * g.tail(k) + 1e-12) << "P(N >= " << k << ")";
    EXPECT_NEAR(n.mean, g.l(), 1e-9);
    EXPECT_EQ(n.quantiles.at(0).value, 4);
    EXPECT_EQ(n.quantiles.at(1).value, 13);
    EXPECT_EQ(n.quantiles.at(2).value, 25);
    EXPECT_EQ(n.quantiles.at(3).value, 36);
}

// ---------------------------------------------------------------- binning

TEST_F(SummaryTest, ManyDistinctValuesAreBinnedButMomentsAndQuantilesStayExact) {
    // 3000 states, 1000 distinct non-integer values, each on three states spread
    // over the ranks; pi geometric. Check values are direct sums over the states
    // (the definitions of mean, std, P(X >= v) and the lower quantile).
    const std::size_t states = 3000;
    std::vector<double> values(states), pi(states);
    double total = 0;
    for (std::size_t i = 0; i < states; ++i) {
        values[i] = double((i * 7919) % 1000) * 0.5 + 0.25;
        pi[i] = std::pow(0.999, double(i));
        total += pi[i];
    }
    for (auto& p : pi)
        p /= total;
    const RowRange rows = even_rows(states, MPI_COMM_WORLD);
    const std::vector<double> levels = {0.1, 0.5, 0.95, 0.999};
    const std::size_t max_points = 7;
    const auto binned = summary::summarize_measure(MPI_COMM_WORLD, "x", "test", part(values, rows),
                                                   part(pi, rows), levels, {}, max_points);
    const auto full = summary::summarize_measure(MPI_COMM_WORLD, "x", "test", part(values, rows),
                                                 part(pi, rows), levels, {});

    double mean = 0, second = 0;
    for (std::size_t i = 0; i < states; ++i)
        mean += values[i] * pi[i];
    for (std::size_t i = 0; i < states; ++i)
        second += (values[i] - mean) * (values[i] - mean) * pi[i];
    const auto tail_at = [&](double v) {
        double t = 0;
        for (std::size_t i = 0; i < states; ++i)
            if (values[i] >= v)
                t += pi[i];
        return t;
    };
    std::vector<std::size_t> order(states);
    std::iota(order.begin(), order.end(), std::size_t{0});
    std::sort(order.begin(), order.end(), [&](auto a, auto b) { return values[a] < values[b]; });

    EXPECT_TRUE(binned.binned);
    EXPECT_FALSE(binned.integral);
    EXPECT_LE(binned.values.size(), max_points);
    EXPECT_EQ(binned.values.size(), binned.pmf.size());
    EXPECT_EQ(binned.values.size(), binned.tail.size());
    EXPECT_NEAR(std::accumulate(binned.pmf.begin(), binned.pmf.end(), 0.0), 1, 1e-13);
    EXPECT_EQ(binned.values.front(), 0.25);
    EXPECT_TRUE(std::is_sorted(binned.values.begin(), binned.values.end()));
    for (std::size_t b = 0; b < binned.values.size(); ++b)
        EXPECT_NEAR(binned.tail[b], tail_at(binned.values[b]), 1e-13);
    EXPECT_NEAR(binned.mean, mean, 1e-10);
    EXPECT_NEAR(binned.std, std::sqrt(second), 1e-10);
    ASSERT_EQ(binned.quantiles.size(), levels.size());
    for (std::size_t q = 0; q < levels.size(); ++q) {
        // Smallest value whose cumulative mass reaches the level. Quantiles read
        // off the bins would give a bin's lowest value, far from these.
        double cumulative = 0, expected = NAN;
        for (std::size_t j = 0; j < states && std::isnan(expected); ++j) {
            cumulative += pi[order[j]];
            const bool last_of_value = j + 1 == states || values[order[j + 1]] != values[order[j]];
            if (last_of_value && cumulative >= levels[q])
                expected = values[order[j]];
        }
        EXPECT_EQ(binned.quantiles[q].value, expected) << "level " << levels[q];
        EXPECT_EQ(full.quantiles[q].value, expected) << "level " << levels[q];
    }
    EXPECT_FALSE(full.binned);
    EXPECT_EQ(full.values.size(), 1000u);
    EXPECT_EQ(full.mean, binned.mean);
}

TEST_F(SummaryTest, IntegralIsDecidedOverAllRanks) {
    // One non-integer value in the last state only: every rank must say "not
    // integral", also those whose own values are all integers.
    io::Chain whole = testing_support::birth_death(1, 8, 1.0, 2.0);
    io::Measure m{"load", {}};
    for (int n = 0; n <= 8; ++n)
        m.values.push_back(n < 8 ? n : 8.5);
    whole.measures = {m, io::Measure{"twice", {0, 2, 4, 6, 8, 10, 12, 14, 16}}};
    const auto pi = std::vector<double>(9, 1.0 / 9);
    const RowRange rows = even_rows(whole.states, MPI_COMM_WORLD);
    summary::StateTable table(slice(whole, rows));
    const auto load = summary::summarize_measure(MPI_COMM_WORLD, "load", "chain measure",
                                                 table.column("load"), part(pi, rows), {}, {});
    const auto twice = summary::summarize_measure(MPI_COMM_WORLD, "twice", "chain measure",
                                                  table.column("twice"), part(pi, rows), {}, {});
    const auto sum = table.evaluate("load+twice", "--measure both=load+twice");
    EXPECT_FALSE(load.integral);
    EXPECT_TRUE(twice.integral);
    EXPECT_EQ(table.names(), (std::vector<std::string>{"n", "load", "twice"}));
    for (std::size_t i = 0; i < sum.size(); ++i)
        EXPECT_EQ(sum[i], table.column("load")[i] + table.column("twice")[i]);
}

// ---------------------------------------------------------------- likely states

TEST_F(SummaryTest, LikelyStatesInOrderWithTiesByIndex) {
    // By the interface's definition: most likely first, ties by lower index.
    const std::vector<double> pi = {0.1, 0.2, 0.05, 0.2, 0.3, 0.05, 0.1};
    io::Chain whole = testing_support::birth_death(1, 6, 1.0, 1.0);
    io::StateVariable tens{"tens", true, {}, {}, {}};
    for (int i = 0; i <= 6; ++i)
        tens.values.push_back(10 * i);
    whole.variables.push_back(tens);
    const RowRange rows = rows_without_first_rank(whole.states, MPI_COMM_WORLD);
    const auto chain = slice(whole, rows);
    const auto top4 = summary::likely_states(MPI_COMM_WORLD, chain, part(pi, rows), 4);
    const auto all = summary::likely_states(MPI_COMM_WORLD, chain, part(pi, rows), 10);
    const auto none = summary::likely_states(MPI_COMM_WORLD, chain, part(pi, rows), 0);

    std::vector<std::uint64_t> got;
    for (const auto& s : all)
        got.push_back(s.index);
    // Ordering by probability alone, leaving ties as the ranks deliver them,
    // could put 3 before 1 or 5 before 2 on several ranks.
    EXPECT_EQ(got, (std::vector<std::uint64_t>{4, 1, 3, 0, 6, 2, 5}));
    ASSERT_EQ(top4.size(), 4u);
    for (std::size_t j = 0; j < 4; ++j) {
        EXPECT_EQ(top4[j].index, all[j].index);
        EXPECT_EQ(top4[j].probability, pi[top4[j].index]);
        ASSERT_EQ(top4[j].variables.size(), 2u);
        EXPECT_EQ(top4[j].variables[0], (std::pair<std::string, double>{"n", top4[j].index}));
        EXPECT_EQ(top4[j].variables[1].first, "tens");
        EXPECT_EQ(top4[j].variables[1].second, 10.0 * top4[j].index);
    }
    EXPECT_TRUE(none.empty());
}

// ---------------------------------------------------------------- errors

TEST_F(SummaryTest, UnknownNamesAreUsageErrorsOnEveryRank) {
    const io::Chain whole = testing_support::birth_death(2, 10, 1.0, 1.0);
    const RowRange rows = rows_without_first_rank(whole.states, MPI_COMM_WORLD);
    const auto chain = slice(whole, rows);
    summary::StateTable table(chain);
    const auto caught = [](auto&& call, const std::string& role, const std::string& name) {
        try {
            call();
        } catch (const UsageError& e) {
            const std::string m = e.what();
            return e.code() == ExitCode::usage && m.find(role) != std::string::npos &&
                   m.find(name) != std::string::npos;
        } catch (...) {
        }
        return false;
    };
    const bool unknown = caught([&] { table.evaluate("n + queue", "--measure load=n+queue"); },
                                "--measure load=n+queue", "'queue'");
    const bool syntax =
        caught([&] { table.evaluate("n >= ", "--tail n>="); }, "--tail n>=", "n >=");
    const bool column = caught([&] { table.column("queue"); }, "unknown", "queue");
    const auto rates =
        summary::event_rates(MPI_COMM_WORLD, chain, std::vector<double>(rows.size()));
    const bool rate = caught([&] { summary::derived_rate("lost=drop-admit", rates); },
                             "--rate lost=drop-admit", "'drop'");
    const bool not_definition =
        caught([&] { summary::derived_rate("drop==admit", rates); }, "--rate drop==admit", "name=");

    // A value that is not finite on one rank only: every rank must throw, after
    // agreeing, or the others would wait in the next collective call.
    std::vector<double> values(rows.size(), 1.0), pi(rows.size(), 1.0 / whole.states);
    if (rows.end == whole.states && !values.empty())
        values.back() = NAN;
    const bool not_finite = caught(
        [&] {
            summary::summarize_measure(MPI_COMM_WORLD, "ratio", "--measure ratio=0/0", values, pi,
                                       {}, {});
        },
        "ratio", "not a finite number");
    // Still in step: a collective after the errors completes on every rank.
    const double mass =
        summary::probability_of(MPI_COMM_WORLD, std::vector<double>(rows.size(), 1), pi);

    EXPECT_TRUE(on_every_rank(unknown));
    EXPECT_TRUE(on_every_rank(syntax));
    EXPECT_TRUE(on_every_rank(column));
    EXPECT_TRUE(on_every_rank(rate));
    EXPECT_TRUE(on_every_rank(not_definition));
    EXPECT_TRUE(on_every_rank(not_finite));
    EXPECT_NEAR(mass, 1, 1e-14);
}

} // namespace
} // namespace longrun

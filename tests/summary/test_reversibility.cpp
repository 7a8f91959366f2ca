// Detailed balance of certified stationary vectors against reversibility facts from
// outside the project. Runs under mpirun with 1, 2 and 3 ranks; every collective
// call happens on every rank before anything is asserted.
#include "support/mpi_fixture.hpp"
#include "support/structure_chains.hpp"
#include "support/test_chains.hpp"

#include "cli/load.hpp"
#include "cli/structure_report.hpp"
#include "solve/assemble.hpp"
#include "summary/reversibility.hpp"

#include <algorithm>
#include <cmath>

namespace longrun {
namespace {

using testing_support::MpiTest;

class DetailedBalanceTest : public MpiTest {
  protected:
    // Solves the chain, then judges detailed balance of the certified vector on the
    // same rows the solve used.
    summary::DetailedBalance balance(const io::Chain& chain, const std::string& name,
                                     std::optional<RowRange> rows = std::nullopt,
                                     const std::string& method = "auto") {
        const auto path = write(chain, name);
        const auto report = solve(path, method, 1e-13, rows);
        residual = report.certificate.residual;
        return judge(path, report.rows, [&](RowRange) { return report.local_pi; });
    }

    // Judges a vector given per state (not solved): entry(v) for each owned state.
    template <class Entry>
    summary::DetailedBalance balance_of(const io::Chain& chain, const std::string& name,
                                        Entry entry) {
        const auto path = write(chain, name);
        residual = 0;
        return judge(path, std::nullopt, [&](RowRange rows) {
            std::vector<double> local;
            for (auto v = rows.begin; v < rows.end; ++v)
                local.push_back(entry(v));
            return local;
        });
    }

    template <class Local>
    summary::DetailedBalance judge(const std::string& path, std::optional<RowRange> rows,
                                   Local local_entries) {
        const auto loaded = cli::load_chain(path, MPI_COMM_WORLD, io::ValidationOptions{}, rows);
        const auto a = solve::assemble_transposed(MPI_COMM_WORLD, cli::local_rows_of(loaded.chain));
        const std::vector<double> local = local_entries(loaded.chain.rows);
        auto pi = solve::create_state_vector(a);
        PetscInt n = 0;
        PetscScalar* v = nullptr;
        VecGetLocalSize(pi, &n);
        VecGetArray(pi, &v);
        layout_matches = static_cast<std::size_t>(n) == local.size();
        std::copy_n(local.begin(), std::min<std::size_t>(n, local.size()), v);
        VecRestoreArray(pi, &v);
        return summary::check_detailed_balance(a, pi);
    }

    double residual = 0;
    bool layout_matches = false;
};

// The three-state chains below are solved with `eigen`: on them BoomerAMG inside
// `linear` fails on one rank only and, under mpirun, the others wait for it.
const std::string small_chain_method = "eigen";

TEST_F(DetailedBalanceTest, BirthDeathQueueIsReversible) {
    // Every birth-death process satisfies detailed balance (Kelly, Reversibility
    // and Stochastic Networks, ch. 1). M/M/3/20: 20 neighbouring pairs, no others.
    const auto b = balance(testing_support::birth_death(3, 20, 2.5, 1.0), "mm3.h5");
    EXPECT_TRUE(layout_matches);
    EXPECT_EQ(b.pairs_checked, 20u);
    EXPECT_EQ(b.pairs_within_residual, 0u);
    EXPECT_EQ(b.one_way_pairs, 0u);
    EXPECT_LT(b.max_relative_violation, 1e-9);
    EXPECT_LT(b.total_relative_imbalance, 1e-11);
    EXPECT_TRUE(summary::is_reversible(b, residual));
    const auto verdict = summary::reversibility_verdict(b, residual);
    EXPECT_EQ(verdict.rfind("detailed balance holds", 0), 0u) << verdict;
}

TEST_F(DetailedBalanceTest, SteepTailDoesNotHideReversibility) {
    // M/M/1/60 at load 0.3 (Kelly, ch. 1, as above): pi_n ~ 0.3^n reaches 1e-32,
    // where the computed entries have no relative accuracy. Those pairs' flows lie
    // within the vector's net-flow residual and are not judged; the rest balance.
    const auto b = balance(testing_support::birth_death(1, 60, 0.3, 1.0), "tail.h5");
    EXPECT_LE(b.pairs_checked + b.pairs_within_residual, 60u); // exact zeros: no pair
    EXPECT_GT(b.pairs_within_residual, 0u);
    EXPECT_GE(b.pairs_checked, 20u); // 0.3^20 ~ 3e-11 of the flow is still resolved
    EXPECT_LT(b.max_relative_violation, 1e-9);
    EXPECT_TRUE(summary::is_reversible(b, residual));
    const auto verdict = summary::reversibility_verdict(b, residual);
    EXPECT_NE(verdict.find("not judged"), std::string::npos) << verdict;
}

TEST_F(DetailedBalanceTest, NoiseWithinTheResidualIsNotAViolation) {
    // M/M/1/60 at load 0.3 with its exact law pi_n = (1 - r) r^n / (1 - r^61)
    // (Gross & Harris, M/M/1/K), plus alternating noise of 1e-17 from n = 30 on,
    // where pi_n < 2e-16: the tail pairs disagree by up to their whole flow, but
    // only by what the vector's own net-flow residual shows. Judged without that
    // slack, the chain would be called irreversible.
    const double r = 0.3;
    auto pi = [&](std::uint64_t n) {
        const double exact = (1 - r) * std::pow(r, double(n)) / (1 - std::pow(r, 61.0));
        return exact + (n >= 30 ? (n % 2 ? 1e-17 : -1e-17) : 0.0);
    };
    const auto b = balance_of(testing_support::birth_death(1, 60, r, 1.0), "noise.h5", pi);
    EXPECT_TRUE(layout_matches);
    EXPECT_GT(b.net_flow_residual, 1e-16);
    EXPECT_GT(b.pairs_within_residual, 20u);
    EXPECT_GE(b.pairs_checked, 25u);
    EXPECT_LT(b.max_relative_violation, 1e-12);
    EXPECT_TRUE(summary::is_reversible(b, 1e-13));
    // The same noise on the one-way 3-cycle, whose exact law is uniform, leaves
    // its flows maximally unbalanced.
    const auto t = balance_of(testing_support::ctmc_triangle(1.0, 0.0), "cycle-noise.h5",
                              [](std::uint64_t v) { return 1.0 / 3 + (v % 2 ? 1e-17 : -1e-17); });
    EXPECT_LT(t.net_flow_residual, 1e-15);
    EXPECT_NEAR(t.max_relative_violation, 1.0, 1e-12);
    EXPECT_FALSE(summary::is_reversible(t, 1e-13));
}

TEST_F(DetailedBalanceTest, TransientStateLeftoverMassIsNotAOneWayFlow) {
    // 0 -> 1 at rate 1, then 1 <-> 2 (rates 2 and 1): state 0 is transient and has
    // probability 0, so its one-way transition carries no stationary flow; the
    // closed class is a birth-death pair and balances (Kelly, ch. 1).
    const auto chain =
        io::chain_from_triples(io::ChainKind::ctmc, 3, {0, 1, 2}, {1, 2, 1}, {1.0, 2.0, 1.0});
    const auto b = balance(chain, "transient.h5", std::nullopt, small_chain_method);
    EXPECT_EQ(b.pairs_checked, 1u);
    EXPECT_LT(b.max_relative_violation, 1e-9);
    EXPECT_TRUE(summary::is_reversible(b, residual));
}

TEST_F(DetailedBalanceTest, EhrenfestUrnIsReversibleDespitePeriodTwo) {
    // A birth-death dtmc (Kelly, ch. 1); Feller I, ch. XV for the urn itself.
    const auto b = balance(testing_support::ehrenfest(14), "ehrenfest.h5");
    EXPECT_EQ(b.pairs_checked, 14u);
    EXPECT_LT(b.max_relative_violation, 1e-9);
    EXPECT_TRUE(summary::is_reversible(b, residual));
}

TEST_F(DetailedBalanceTest, RandomWalkOnAGraphHasEqualFlowOnEveryEdge) {
    // pi(v) = deg(v) / 2|E|, so pi_v P_vw = 1 / 2|E| along every edge in both
    // directions (Levin, Peres & Wilmer, Markov Chains and Mixing Times, sec. 1.4
    // and 1.6 on reversibility). No self-loops: the total flow is sum pi = 1.
    std::vector<std::pair<std::uint64_t, std::uint64_t>> edges;
    const std::uint64_t n = 30;
    for (std::uint64_t v = 0; v < n; ++v)
        edges.emplace_back(v, (v + 1) % n);
    for (std::uint64_t v = 0; v < n; v += 4)
        edges.emplace_back(v, (v + 11) % n);
    const auto b = balance(testing_support::graph_walk(n, edges), "walk.h5");
    EXPECT_EQ(b.pairs_checked, edges.size());
    EXPECT_NEAR(b.total_flow, 1.0, 1e-12);
    EXPECT_NEAR(b.worst_pair_flow, 1.0 / (2.0 * edges.size()), 1e-12);
    EXPECT_LT(b.max_relative_violation, 1e-9);
    EXPECT_TRUE(summary::is_reversible(b, residual));
}

TEST_F(DetailedBalanceTest, ReversibleChainWithACycleSatisfyingKolmogorovsCriterion) {
    // Rates 0->1 1, 1->2 2, 2->0 3 and back 1->0 2, 2->1 3, 0->2 1: the products
    // around the cycle agree (6 = 6), so the chain is reversible by Kolmogorov's
    // criterion (Kelly, ch. 1, Theorem 1.8; theorem number recalled from memory),
    // with pi = (6, 3, 2) / 11 from pi_0 q01 = pi_1 q10 and pi_1 q12 = pi_2 q21.
    const auto chain = io::chain_from_triples(io::ChainKind::ctmc, 3, {0, 1, 2, 1, 2, 0},
                                              {1, 2, 0, 0, 1, 2}, {1, 2, 3, 2, 3, 1});
    const auto b = balance(chain, "kolmogorov.h5", std::nullopt, small_chain_method);
    EXPECT_EQ(b.pairs_checked, 3u);
    EXPECT_LT(b.max_relative_violation, 1e-9);
    // Flows 6/11 on every pair, both ways: total 6 * 6/11.
    EXPECT_NEAR(b.total_flow, 36.0 / 11.0, 1e-11);
    EXPECT_TRUE(summary::is_reversible(b, residual));
}

TEST_F(DetailedBalanceTest, OneWayCycleIsMaximallyNotReversible) {
    // 0 -> 1 -> 2 -> 0 at rate 1: pi uniform (doubly stochastic generator), flow
    // 1/3 one way on each pair and none back, so every pair violates by exactly 1.
    const auto b = balance(testing_support::ctmc_triangle(1.0, 0.0), "cycle.h5", std::nullopt,
                           small_chain_method);
    EXPECT_EQ(b.pairs_checked, 3u);
    EXPECT_EQ(b.one_way_pairs, 3u);
    EXPECT_TRUE(b.worst_one_way);
    EXPECT_NEAR(b.max_relative_violation, 1.0, 1e-12);
    EXPECT_EQ(b.from, 0u);
    EXPECT_EQ(b.to, 1u);
    EXPECT_NEAR(b.total_flow, 1.0, 1e-12);
    EXPECT_NEAR(b.total_relative_imbalance, 1.0, 1e-12);
    EXPECT_FALSE(summary::is_reversible(b, residual));
    const auto verdict = summary::reversibility_verdict(b, residual);
    EXPECT_EQ(verdict.rfind("not reversible", 0), 0u) << verdict;
    EXPECT_NE(verdict.find("between states 0 and 1, no flow from 1 back to 0"), std::string::npos)
        << verdict;
}

TEST_F(DetailedBalanceTest, LopsidedCycleBreaksKolmogorovsCriterion) {
    // Forward rate 2, backward 1 round 0, 1, 2: products 8 against 1, not
    // reversible (Kelly, ch. 1, Kolmogorov's criterion). pi is uniform (every
    // state gains and loses rate 3), so f_forward = 2/3, f_back = 1/3 on each pair:
    // violation (2/3 - 1/3) / (2/3) = 1/2, imbalance 3 * 1/3 over total flow 3.
    const auto b = balance(testing_support::ctmc_triangle(2.0, 1.0), "lopsided.h5", std::nullopt,
                           small_chain_method);
    EXPECT_EQ(b.pairs_checked, 3u);
    EXPECT_EQ(b.one_way_pairs, 0u);
    EXPECT_NEAR(b.max_relative_violation, 0.5, 1e-12);
    EXPECT_NEAR(b.total_relative_imbalance, 1.0 / 3.0, 1e-12);
    EXPECT_FALSE(summary::is_reversible(b, residual));
}

TEST_F(DetailedBalanceTest, TandemLineIsNotReversible) {
    // (a, b) -> (a-1, b+1) is a service at station 1 with no transition back, so
    // flow crosses those pairs one way only (Kelly, ch. 1: reversibility needs
    // q_ij > 0 exactly when q_ji > 0 on the support of pi).
    const auto chain = testing_support::tandem(8, 9, 1.0, 1.3, 1.1);
    const auto b = balance(chain, "tandem.h5");
    EXPECT_NEAR(b.max_relative_violation, 1.0, 1e-9);
    EXPECT_TRUE(b.worst_one_way);
    // The pair named carries flow one way and has no reverse transition.
    auto has = [&](std::uint64_t i, std::uint64_t j) {
        for (auto k = chain.offsets[i]; k < chain.offsets[i + 1]; ++k)
            if (chain.targets[k] == j)
                return true;
        return false;
    };
    ASSERT_LT(std::max(b.from, b.to), chain.states);
    EXPECT_TRUE(has(b.from, b.to));
    EXPECT_FALSE(has(b.to, b.from));
    // Every transition of the tandem line is one way (arrivals, moves and
    // departures never undo each other in one step): all pairs are one-way.
    EXPECT_EQ(b.one_way_pairs, b.pairs_checked);
    EXPECT_EQ(b.pairs_checked + b.pairs_within_residual, chain.transitions);
    EXPECT_FALSE(summary::is_reversible(b, residual));
}

TEST_F(DetailedBalanceTest, RanksWithoutRowsTakePartAndAgree) {
    if (size < 2)
        GTEST_SKIP() << "needs at least 2 ranks";
    const auto chain = testing_support::birth_death(2, 30, 1.5, 1.0);
    const std::uint64_t n = chain.states;
    // Rank 0 owns nothing; the rest split the rows.
    const RowRange rows =
        rank == 0 ? RowRange{0, 0} : RowRange{(rank - 1) * n / (size - 1), rank * n / (size - 1)};
    const auto b = balance(chain, "bd-empty-first.h5", rows);
    EXPECT_TRUE(layout_matches);
    EXPECT_EQ(b.pairs_checked, 30u);
    EXPECT_LT(b.max_relative_violation, 1e-9);
    const auto cycle =
        balance(testing_support::ctmc_triangle(1.0, 0.0), "cycle-empty.h5",
                rank == size - 1 ? RowRange{0, 3} : RowRange{3, 3}, small_chain_method);
    EXPECT_NEAR(cycle.max_relative_violation, 1.0, 1e-12);
    EXPECT_EQ(cycle.from, 0u);
    EXPECT_EQ(cycle.to, 1u);
}

} // namespace
} // namespace longrun

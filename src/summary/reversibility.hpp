// Detailed balance of a stationary vector: pi_i q_ij = pi_j q_ji (dtmc: p_ij) for
// every pair of distinct states. It holds exactly when the stationary process is
// reversible, and then the cut equations and product forms that modellers look for
// are available; a chain whose certified vector breaks it is not reversible.
//
// How small flows are treated. A computed pi balances the flows at each state only
// up to its residual: the net flows sum_j (f_ij - f_ji) add up, in absolute value,
// to R = ||pi Q||_1 (dtmc ||pi P - pi||_1), the certificate's own quantity before
// uniformisation. On a chain whose transition graph is a tree (every birth-death
// chain) the imbalance of a pair is the net flow across a cut, so it is at most R
// whatever the accuracy of the single entries; in general it is of that order. So
// each pair's imbalance is judged only beyond R:
//     violation_ij = max(0, |f_ij - f_ji| - R) / max(f_ij, f_ji).
// Without that slack the tail of any queue, where pi is 1e-20 and known to no
// relative accuracy, would call every birth-death chain irreversible (measured:
// M/M/1/60 at load 0.3, solved to a 1e-14 residual, showed raw relative imbalances
// of 0.1 to 1 at pairs carrying 1e-15 of the flow). A pair whose larger flow is
// within R, a transient state's leftover mass included, cannot be judged; a
// transition whose reverse is absent is a violation of 1 - R / f, i.e. maximal.
#pragma once

#include "solve/assemble.hpp"

#include <petscvec.h>

#include <cstdint>
#include <string>

namespace longrun::summary {

struct DetailedBalance {
    // max over pairs of the violation above; 1 means flow one way and none back.
    double max_relative_violation = 0;
    // Where it occurs: `from` -> `to` carries the larger flow of the pair. The
    // lowest pair (by smaller state, then larger) among ties.
    std::uint64_t from = 0, to = 0;
    double worst_pair_flow = 0;              // max(f_from_to, f_to_from) / total_flow
    bool worst_one_way = false;              // no flow at all from `to` back to `from`
    std::uint64_t pairs_checked = 0;         // unordered pairs with a flow above R
    std::uint64_t pairs_within_residual = 0; // pairs with some flow, all within R
    std::uint64_t one_way_pairs = 0;         // checked pairs with no flow back at all
    double total_relative_imbalance = 0;     // sum |f_ij - f_ji| / sum f_ij, in [0, 1]
    double total_flow = 0;                   // sum over i != j of f_ij (pi as given)
    double net_flow_residual = 0;            // R / total_flow
};

// Collective. `pi` has the layout of `a` (solve::create_state_vector), ideally a
// certified stationary vector; it is not modified, its scale does not matter, and
// negative entries (clipped by the certificate anyway) count as 0. Holds two more
// copies of the matrix while it runs (the flows and their transpose).
DetailedBalance check_detailed_balance(const solve::TransposedChain& a, Vec pi);

// The largest violation still called "holds", given the certificate's residual.
double reversibility_tolerance(double certified_residual);

bool is_reversible(const DetailedBalance& b, double certified_residual);

// One plain-language line, e.g. "detailed balance holds (...): the chain is
// reversible, ..." or "not reversible (max relative violation 0.42 between ...)".
std::string reversibility_verdict(const DetailedBalance& b, double certified_residual);

} // namespace longrun::summary

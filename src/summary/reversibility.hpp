// Detailed balance of a stationary vector: pi_i q_ij = pi_j q_ji (dtmc: p_ij) for
// every pair of distinct states. It holds exactly when the stationary process is
// reversible, and then the cut equations and product forms that modellers look for
// are available; a chain whose certified vector breaks it is not reversible.
#pragma once

#include "solve/assemble.hpp"

#include <petscvec.h>

#include <cstdint>
#include <string>

namespace longrun::summary {

// Pairs whose larger flow is at most this fraction of the total flow are not
// judged. A certified pi is accurate to about its residual relative to its largest
// entries, not relative to each entry, so a pair this small has flows known to no
// relative accuracy at all; and a transient state's rounding-level mass would
// otherwise show up as a one-way flow.
inline constexpr double default_flow_floor = 1e-15;

struct DetailedBalance {
    // max |f_ij - f_ji| / max(f_ij, f_ji) over the judged pairs, f_ij = pi_i q_ij.
    double max_relative_violation = 0;
    // Where it occurs: `from` -> `to` carries the larger flow of the pair. Lowest
    // state pair first among ties.
    std::uint64_t from = 0, to = 0;
    double worst_pair_flow = 0;          // max(f_from_to, f_to_from) / total_flow
    std::uint64_t pairs_checked = 0;     // unordered pairs judged
    std::uint64_t pairs_below_floor = 0; // pairs with some flow, all of it under the floor
    std::uint64_t one_way_pairs = 0;     // judged pairs with flow in one direction only
    double total_relative_imbalance = 0; // sum |f_ij - f_ji| / sum f_ij, in [0, 1]
    double total_flow = 0;               // sum over i != j of f_ij (pi as given)
    double floor = 0;                    // absolute flow at or below which a pair is skipped
};

// Collective. `pi` has the layout of `a` (solve::create_state_vector) and should be
// a certified stationary vector; it is not modified, its scale does not matter, and
// negative entries (clipped by the certificate anyway) count as 0. `flow_floor` is
// a fraction of the total flow, see default_flow_floor.
DetailedBalance check_detailed_balance(const solve::TransposedChain& a, Vec pi,
                                       double flow_floor = default_flow_floor);

// The largest relative violation still called "holds" for a vector with this
// certified residual: max(1e-6, 1e3 * residual).
double reversibility_tolerance(double certified_residual);

bool is_reversible(const DetailedBalance& b, double certified_residual);

// One plain-language line, e.g. "detailed balance holds (max relative violation
// 3e-12 over 40 pairs): the chain is reversible, ..." or "not reversible: ...".
std::string reversibility_verdict(const DetailedBalance& b, double certified_residual);

} // namespace longrun::summary

// Long-run event rates: how often each labelled event happens per unit time
// (ctmc) or per step (dtmc), and derived rates (--rate "lost=drop/(drop+admit)").
#pragma once

#include "io/chain.hpp"
#include "io/summary_record.hpp"

#include <mpi.h>

#include <span>
#include <string>
#include <vector>

namespace longrun::summary {

// Collective. For each event name: sum_i pi_i * intensity_e(i), where the
// intensity is the chain's /events/<name> vector when present (it counts
// firings that leave the state unchanged, e.g. arrivals lost when full), else
// the sum of the weights of row i's transitions labelled e. Merged transitions
// ("several") are reported under that label. Every rank returns the same list.
std::vector<io::EventRateRecord> event_rates(MPI_Comm comm, const io::Chain& chain,
                                             std::span<const double> pi);

// "per unit time" (ctmc) or "per step" (dtmc).
std::string rate_unit(io::ChainKind kind);

// Evaluates "name=expression" over the event rates (event names are the
// variables). Throws UsageError naming the option on an unknown name.
io::EventRateRecord derived_rate(const std::string& definition,
                                 const std::vector<io::EventRateRecord>& rates);

} // namespace longrun::summary

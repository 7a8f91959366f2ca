// Monte-Carlo time averages of a chain held whole in memory: an independent check
// of a solve (it shares no code with the solvers) and a way to watch what a chain
// that is not ergodic does from a given start.
//
// Changes to the lead's draft (no signature changed): prepare() and a
// run_replication() overload that takes its result, so that many replications
// on one rank build the sampler and the value tables once; the meaning of
// ReplicationResult::transitions and of an interval with fewer than two
// batches is spelled out below; Estimate::standard_error added, so that pooling
// and the homogeneity test need not know the confidence the runs used.
#pragma once

#include "io/chain.hpp"

#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <vector>

namespace longrun::simulate {

struct RunLength {
    // Exactly one of these: simulated time (ctmc; for a dtmc it counts steps) or steps.
    std::optional<double> time;
    std::optional<std::uint64_t> steps;
    // Discarded first (same unit as the run length: time for a ctmc with --time,
    // steps otherwise).
    double warmup = 0;
};

struct SimulationSettings {
    RunLength length;
    std::uint64_t seed = 1;
    std::uint64_t start_state = 0;
    double confidence = 0.95; // of each interval
};

// One quantity's estimate from one run: its time average (state variables and
// measures) or its long-run rate (events: firings per unit time, or per step),
// with a batch-means confidence interval.
struct Estimate {
    std::string name;
    std::string kind; // "variable", "measure", "event"
    double mean = 0;
    double half_width = 0;     // of the interval at `confidence`; infinity with < 2 batches
    double standard_error = 0; // of `mean` (batch means); infinity with < 2 batches
    std::uint64_t batches = 0; // used for the interval
    double batch_size = 0;     // in time units (ctmc) or steps (dtmc)
};

struct ReplicationResult {
    std::uint64_t index = 0; // 0-based replication number: its random stream
    // After warm-up: jumps (ctmc, self-loops included) or steps (dtmc).
    std::uint64_t transitions = 0;
    double simulated = 0; // time (ctmc) or steps (dtmc) after warm-up
    double wall_seconds = 0;
    // A state with no way out was reached: the path is held there to the end of
    // the run (a ctmc run by steps: for the remaining steps at the run's mean
    // holding time so far), and the averages include that time.
    std::optional<std::uint64_t> absorbed_in;
    std::uint64_t final_state = 0;
    std::vector<Estimate> estimates; // same order in every replication
};

// Serial: one replication on a whole chain (rows = [0, states)). The stream is a
// pure function of (seed, index): results do not depend on how replications are
// spread over ranks. Quantities: every state variable, measure and event of the
// chain (events from /events intensities when present, else transition labels).
// Throws std::invalid_argument on settings it cannot run (no or two run
// lengths, a start state outside the chain, a chain not held whole).
ReplicationResult run_replication(const io::Chain& chain, const SimulationSettings& settings,
                                  std::uint64_t index);

// The chain made ready for simulation: sampling tables and per-state values.
// It refers to `chain`, which must outlive it. Same results as above.
struct PreparedChain;
std::shared_ptr<const PreparedChain> prepare(const io::Chain& chain);
ReplicationResult run_replication(const PreparedChain& prepared, const SimulationSettings& settings,
                                  std::uint64_t index);

// Pooled over replications: the replication estimates combined (weighted by
// simulated length), with an interval from the runs' batch-means variances
// (Welch-Satterthwaite degrees of freedom). Meaningful only when
// disagreeing_quantities() is empty.
std::vector<Estimate> pool(const std::vector<ReplicationResult>& replications, double confidence);

// Whether the replications' estimates of any quantity differ by more than their
// intervals allow: Cochran's Q test of homogeneity on each quantity, at
// `significance` per quantity. Returns the names of the quantities that disagree.
std::vector<std::string> disagreeing_quantities(const std::vector<ReplicationResult>& replications,
                                                double significance = 1e-3);

} // namespace longrun::simulate

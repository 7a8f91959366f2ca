// The whole `simulate` job without the command line: every rank reads the whole
// chain, runs its share of the replications (replication r on rank r % size),
// all results are gathered to every rank, and the job decides whether the
// replications agree (else the chain is not ergodic from the start) and, given a
// solved result, whether the simulation confirms it.
#pragma once

#include "io/chain_file.hpp"
#include "simulate/simulation.hpp"

#include <mpi.h>

#include <functional>
#include <optional>
#include <string>
#include <vector>

namespace longrun::cli {

struct SimulateRequest {
    std::string chain_path;
    simulate::RunLength length;
    std::uint64_t replications = 1;
    std::uint64_t seed = 1;
    std::optional<std::string> from; // a state index, or "var=value,..."
    std::optional<std::string> against;
    double confidence = 0.95;
    io::ValidationOptions validation;
    // Called on the rank that ran it, as each replication finishes.
    std::function<void(const simulate::ReplicationResult&)> on_replication;
};

// How one replication ended: where it was, in words, and whether it was stuck.
struct ReplicationEnd {
    std::uint64_t index = 0;
    std::uint64_t state = 0;
    std::string description; // "state 17 (q1=3, q2=0)"
    bool absorbed = false;
};

// One pooled estimate against the solved value.
struct Comparison {
    std::string name, kind;
    std::optional<double> solved; // absent when the result has no counterpart
    bool agrees = true;
};

struct SimulateReport {
    std::string chain_path, kind; // kind: "ctmc" or "dtmc"
    std::uint64_t states = 0, transitions = 0;
    int ranks = 1;
    std::uint64_t start_state = 0;
    std::string start_description;
    double confidence = 0.95;
    std::string length_unit;                               // "time" or "steps"
    std::vector<simulate::ReplicationResult> replications; // in index order
    std::vector<ReplicationEnd> ends;                      // in index order
    // Quantities whose time averages differ across replications beyond chance.
    std::vector<std::string> disagreeing;
    bool ergodic_from_start() const { return disagreeing.empty(); }
    // Pooled over the replications; empty when they disagree (pooling would
    // average behaviours that never mix). Intervals at `pooled_confidence`.
    std::vector<simulate::Estimate> pooled;
    double pooled_confidence = 0.95;
    // --against: the per-quantity level is Bonferroni-adjusted,
    // 1 - (1 - confidence) / m for m compared quantities, so that a correct
    // solve is flagged with probability at most 1 - confidence in all.
    std::optional<std::string> against;
    std::vector<Comparison> comparisons; // aligned with `pooled`
    std::size_t compared = 0;            // quantities with a solved value
    std::size_t disagreements = 0;
    std::uint64_t total_transitions = 0;
    double wall_seconds = 0;
    std::string verdict; // one plain line
    int exit_code = 0;   // 0, or 5 when the simulation does not confirm --against
};

inline constexpr const char* not_ergodic_words =
    "time averages disagree across replications: the chain is not ergodic from this start";

// Collective. UsageError (exit 1) for a bad run length, start or level;
// InputError (exit 2) for an unreadable chain or result, or a result of another chain.
SimulateReport run_simulation(MPI_Comm comm, const SimulateRequest& request);

// Serial: the state that `text` names — an index, or "var=value,..." naming
// values of state variables that exactly one state has. UsageError otherwise.
std::uint64_t find_start_state(const io::Chain& chain, const std::string& text);

} // namespace longrun::cli

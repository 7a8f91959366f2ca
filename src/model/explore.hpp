// Breadth-first exploration of a model's reachable states into a chain (schema
// v1 in memory). States are numbered in discovery order, so state 0 is `start`
// and each state's row is complete when it is expanded: the CSR arrays are
// written front to back, never sorted afterwards.
#pragma once

#include "model.hpp"

#include "io/chain.hpp"

#include <cstdint>
#include <functional>
#include <string>

namespace longrun::model {

// How a packed state finds its index. `direct` is an array over every
// combination of the variables' values (4 bytes each, pages touched only where
// states lie): no hashing, and neighbouring states sit in neighbouring memory.
// `hash` is an open-addressing table for models whose combinations are too many.
enum class Lookup { automatic, direct, hash };

struct ExploreProgress {
    std::uint64_t states = 0;   // found so far
    std::uint64_t frontier = 0; // found but not yet expanded
    double seconds = 0;
};

struct ExploreOptions {
    std::uint64_t max_states = 0;    // 0: default_max_states()
    std::uint64_t memory_budget = 0; // bytes the exploration may hold; 0: from MemAvailable
    Lookup lookup = Lookup::automatic;
    double progress_interval = 1.0; // seconds between progress calls
    std::function<void(const ExploreProgress&)> progress;
};

struct ExploreReport {
    std::uint64_t states = 0, transitions = 0;
    std::uint64_t merged = 0;             // transitions folded into another with the same target
    std::uint64_t dropped_self_loops = 0; // ctmc: events that leave the state as it is
    std::uint64_t unintended_absorbing = 0;
    std::string first_unintended_absorbing; // "state 12 (a=1, b=0)"
    std::uint64_t max_states = 0;
    bool direct_lookup = false;
    double seconds = 0;
};

// Throws InputError for every fault of the model found while exploring (naming
// the model file, line and state) and for a state space above max_states or the
// memory budget.
io::Chain explore(const Model& model, const ExploreOptions& options = {},
                  ExploreReport* report = nullptr);

// MemAvailable from /proc/meminfo (0 when unknown).
std::uint64_t available_memory_bytes();
// Bytes a state costs at the peak of generation and writing, with every event
// enabled in every state: a bound, so the default limit is safe.
std::uint64_t bytes_per_state(const Model& model);
std::uint64_t default_max_states(const Model& model);
// The analysis (and the lookup tables here) index states with 32 bits.
inline constexpr std::uint64_t max_states_limit = 4294967294ULL;

} // namespace longrun::model

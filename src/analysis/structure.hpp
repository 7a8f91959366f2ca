// Structure of a chain's transition graph: strongly connected components, closed
// (bottom) classes, transient and absorbing states, and the period of each closed
// class of a dtmc. A unique stationary distribution exists exactly when there is
// one closed class (a periodic one included: its stationary law is still unique).
//
// The graph (targets only, edges of positive weight) is gathered to rank 0 and
// analysed there in O(states + transitions); the verdict is shared with every
// rank. Rank 0 needs about 4 bytes per transition plus 24 bytes per state.
#pragma once

#include "solve/local_rows.hpp"

#include <mpi.h>

#include <cstdint>
#include <vector>

namespace longrun::analysis {

struct ClosedClass {
    std::uint64_t size = 0;
    std::uint64_t period = 0;                   // dtmc only; 0 for a ctmc
    std::vector<std::uint64_t> representatives; // up to 10 lowest-numbered states
    bool absorbing() const noexcept { return size == 1; }
};

struct Structure {
    std::uint64_t states = 0;
    std::uint64_t edges = 0; // transitions of positive weight between distinct states
    std::uint64_t self_loops = 0;
    std::uint64_t zero_weights = 0;
    std::uint64_t min_out_degree = 0, max_out_degree = 0, max_in_degree = 0;
    double mean_out_degree = 0;
    std::uint64_t components = 0;
    std::vector<std::uint64_t> largest_components; // sizes, largest first, up to 5
    std::vector<ClosedClass> closed;               // ordered by lowest state
    std::uint64_t transient = 0;
    std::vector<std::uint64_t> transient_representatives; // up to 10
    // Weak coupling: an edge is weak when its weight is below `weak_ratio` times
    // the largest weight leaving its state. When dropping the weak edges splits
    // the chain into several blocks (strongly connected, 2 states or more) that
    // together hold most states, the chain is nearly completely decomposable:
    // its spectrum clusters near the stationary eigenvalue and aggregation pays.
    static constexpr double weak_ratio = 1e-3;
    std::uint64_t weak_edges = 0;
    std::uint64_t strong_blocks = 0;    // blocks of 2 or more states once weak edges are dropped
    std::uint64_t states_in_blocks = 0; // states in those blocks
    bool nearly_decomposable() const noexcept {
        return strong_blocks >= 2 && 2 * states_in_blocks >= states;
    }
    bool unique() const noexcept { return closed.size() == 1; }
    // Per state: the index into `closed`, or `not_closed` for a transient state.
    // Filled on every rank only when asked (4 bytes per state).
    static constexpr std::uint32_t not_closed = 0xffffffffu;
    std::vector<std::uint32_t> class_of;
};

// Collective. Throws InputError (on every rank) when the graph is too large to
// gather: more than 2^31 - 1 transitions or 2^32 - 2 states.
Structure analyse(MPI_Comm comm, const solve::LocalRows& rows, bool want_class_of = false);

} // namespace longrun::analysis

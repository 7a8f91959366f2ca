// One level of the aggregation hierarchy: this rank's rows of a singular
// generator-like matrix A (A x = 0, zero column sums, non-negative off-diagonals)
// in plain CSR, split into the columns this rank owns and the ghost columns of
// other ranks, plus the iterate x of that level. Kept in our own arrays rather
// than PETSc Mats because every cycle rebuilds the coarse values from the
// current iterate, and a precomputed map from fine entries to coarse entries
// makes that rebuild a single pass over the fine entries.
#pragma once

#include "assemble.hpp"
#include "handles.hpp"

#include <cstdint>
#include <vector>

namespace longrun::solve {

struct LocalCsr {
    std::vector<PetscInt> row_start{0};
    std::vector<PetscInt> column;
    std::vector<double> value;
};

struct AggregationLevel {
    MPI_Comm comm = MPI_COMM_NULL;
    PetscInt begin = 0, local = 0, global = 0; // contiguous ownership
    LocalCsr owned;                            // columns: local row numbers
    LocalCsr ghost;                            // columns: positions in ghost_global
    std::vector<PetscInt> diagonal_at;         // position of a_ii in owned
    std::vector<PetscInt> ghost_global;        // sorted global indices of ghost columns
    ScatterHandle to_ghosts;                   // x (global) -> ghosts (sequential)
    VecHandle x, ghosts;
    // Integer state variables per local row (variable-major); empty when unknown.
    std::vector<std::vector<std::int64_t>> coordinates;

    // Collective: refreshes `ghosts` from `x`.
    void update_ghosts();
    // Collective: one Gauss-Seidel sweep on A x = 0 over the local rows (ghost
    // values frozen, i.e. block Jacobi between ranks as MatSOR does).
    void sweep(bool forward);
};

// Collective. The finest level from A = Q^T (ctmc) or P^T - I (dtmc).
AggregationLevel finest_level(const TransposedChain& a);

// Collective. Finishes a level whose ownership and CSR are set: ghost scatter and vectors.
void connect_level(AggregationLevel& level);

// The coarse operator A_c = R A diag(x) P of De Sterck et al. (R aggregate sums,
// P the 0/1 prolongation). The symbolic part (which coarse entry each fine
// entry adds to) is built once per hierarchy; numeric() redoes the values from
// the fine level's current iterate.
class CoarseOperator {
  public:
    // Collective. `aggregate` gives each local fine row its local aggregate
    // (0..count-1); aggregates never span ranks.
    CoarseOperator(const AggregationLevel& fine, std::vector<PetscInt> aggregate, PetscInt count);
    AggregationLevel& coarse() { return coarse_; }
    const std::vector<PetscInt>& aggregate() const { return aggregate_; }
    // Collective: coarse values from the fine level's x (ghosts are refreshed here),
    // with x lifted to at least `floor_ratio` times its largest entry: w = max(x, floor).
    // Where the stationary probabilities underflow, whole aggregates have x = 0; their
    // coarse columns would vanish and the coarse chain could not leave them (GTH then
    // finds it reducible). With w > 0 every level keeps the fine chain's connections.
    // 0: no floor.
    void numeric(AggregationLevel& fine, double floor_ratio);
    // Local: x_fine[i] = w_i x_coarse[aggregate(i)], w as in the last numeric(), so
    // that the correction is De Sterck et al.'s cycle applied to the lifted iterate.
    void prolong(AggregationLevel& fine);

  private:
    AggregationLevel coarse_;
    std::vector<PetscInt> aggregate_;
    std::vector<PetscInt> owned_target_; // per fine owned entry: coarse position (>= 0 owned,
                                         // < 0: ghost position -1-p)
    std::vector<PetscInt> ghost_target_; // per fine ghost entry, same encoding
    double floor_ = 0;                   // the lift of the last numeric()
};

} // namespace longrun::solve

// Where iterative methods start and how they look at single entries: the warm
// start when there is one, otherwise the uniform vector, and a cheap estimate of
// where the probability mass lies (for choosing a pin). All calls are collective.
#pragma once

#include "assemble.hpp"

#include <mpi.h>

#include <utility>

namespace longrun::solve {

// A copy of the warm start, or the uniform vector when there is none.
inline VecHandle starting_iterate(const TransposedChain& a, Vec warm_start) {
    VecHandle x = create_state_vector(a);
    if (warm_start)
        check(VecCopy(warm_start, x), "VecCopy");
    else
        check(VecSet(x, 1.0 / static_cast<double>(a.states)), "VecSet");
    return x;
}

// A few steps of the lazy uniformised chain (I + P)/2 from `x` (in place). Lazy,
// so that a periodic chain cannot make the steps oscillate.
inline void lazy_steps(const TransposedChain& a, Vec x, int steps) {
    VecHandle y = create_state_vector(a);
    const double scale = 0.5 / a.uniformisation; // P = I + Q/lambda
    for (int k = 0; k < steps; ++k) {
        check(MatMult(a.matrix, x, y), "MatMult");
        if (a.time == TimeModel::continuous) // x <- x + Q^T x / (2 lambda)
            check(VecAXPY(x, scale, y), "VecAXPY");
        else // x <- (x + P^T x) / 2
            check(VecAXPBY(x, 0.5, 0.5, y), "VecAXPBY");
    }
}

// Index and value of the largest entry.
inline std::pair<PetscInt, double> largest_entry(Vec x) {
    PetscInt at = 0;
    PetscReal value = 0;
    check(VecMax(x, &at, &value), "VecMax");
    return {at, value};
}

// The entry at a global index, on every rank.
inline double entry_at(Vec x, PetscInt index) {
    PetscInt lo = 0, hi = 0;
    check(VecGetOwnershipRange(x, &lo, &hi), "VecGetOwnershipRange");
    double mine = 0;
    if (index >= lo && index < hi) {
        const PetscScalar* v = nullptr;
        check(VecGetArrayRead(x, &v), "VecGetArrayRead");
        mine = v[index - lo];
        check(VecRestoreArrayRead(x, &v), "VecRestoreArrayRead");
    }
    double all = 0;
    MPI_Allreduce(&mine, &all, 1, MPI_DOUBLE, MPI_SUM, PetscObjectComm((PetscObject)x));
    return all;
}

// Normalises x to sum 1 in place; returns the sum it had.
inline double normalise(Vec x) {
    PetscScalar sum = 0;
    check(VecSum(x, &sum), "VecSum");
    if (sum != 0)
        check(VecScale(x, 1.0 / sum), "VecScale");
    return sum;
}

} // namespace longrun::solve

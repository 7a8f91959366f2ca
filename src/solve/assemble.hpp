// A = Q^T (ctmc) or P^T (dtmc) as a distributed PETSc matrix whose row ownership
// follows the chain's (destination state rows after the transpose).
#pragma once

#include "handles.hpp"
#include "local_rows.hpp"

#include <mpi.h>

namespace longrun::solve {

struct TransposedChain {
    MatHandle matrix; // Q^T or P^T
    TimeModel time = TimeModel::continuous;
    double uniformisation = 1; // ctmc: max_i |q_ii| (the residual's scale); dtmc: 1
    PetscInt states = 0;
};

// Collective. Throws InputError when the chain does not fit this PETSc build's
// index type.
TransposedChain assemble_transposed(MPI_Comm comm, const LocalRows& rows);

// Collective: a vector with the chain's row layout.
VecHandle create_state_vector(const TransposedChain& a);

} // namespace longrun::solve

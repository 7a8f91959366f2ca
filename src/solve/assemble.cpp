#include "assemble.hpp"

#include <algorithm>
#include <limits>
#include <string>
#include <vector>

namespace longrun::solve {

TransposedChain assemble_transposed(MPI_Comm comm, const LocalRows& in) {
    if (in.states >= static_cast<std::uint64_t>(std::numeric_limits<PetscInt>::max()))
        throw InputError("the chain has " + std::to_string(in.states) +
                         " states, more than this PETSc build's " +
                         std::to_string(8 * sizeof(PetscInt)) +
                         "-bit indices allow (use a 64-bit-index PETSc build)");
    const auto n_local = static_cast<PetscInt>(in.rows.size());
    const bool ctmc = in.time == TimeModel::continuous;

    // Rows of Q (or P) with the diagonal merged in, in PETSc's index type.
    std::vector<PetscInt> row_ptr(n_local + 1, 0);
    std::vector<PetscInt> cols;
    std::vector<PetscScalar> vals;
    cols.reserve(in.targets.size() + n_local);
    vals.reserve(cols.capacity());
    double max_exit = 0;
    for (PetscInt i = 0; i < n_local; ++i) {
        const std::uint64_t row = in.rows.begin + i;
        const auto first = in.offsets[i], last = in.offsets[i + 1];
        // Every row gets a stored diagonal (an explicit zero if need be): PETSc's
        // shifts and row pinning need it, and a missing one would cost a malloc
        // per row in parallel.
        double diagonal = 0;
        if (ctmc) {
            for (auto k = first; k < last; ++k)
                if (in.targets[k] != row) // a rate to itself changes nothing
                    diagonal -= in.weights[k];
            max_exit = std::max(max_exit, -diagonal);
        } else {
            for (auto k = first; k < last; ++k)
                if (in.targets[k] == row)
                    diagonal = in.weights[k];
        }
        bool diagonal_done = false;
        for (auto k = first; k < last; ++k) {
            const auto t = in.targets[k];
            if (!diagonal_done && t >= row) {
                cols.push_back(static_cast<PetscInt>(row));
                vals.push_back(diagonal);
                diagonal_done = true;
            }
            if (t != row) {
                cols.push_back(static_cast<PetscInt>(t));
                vals.push_back(in.weights[k]);
            }
        }
        if (!diagonal_done) {
            cols.push_back(static_cast<PetscInt>(row));
            vals.push_back(diagonal);
        }
        row_ptr[i + 1] = static_cast<PetscInt>(cols.size());
    }

    MatHandle forward;
    check(MatCreate(comm, forward.out()), "MatCreate");
    check(MatSetSizes(forward, n_local, n_local, PETSC_DETERMINE, PETSC_DETERMINE), "MatSetSizes");
    check(MatSetType(forward, MATAIJ), "MatSetType");
    // Exact preallocation from our own CSR, then one transpose in PETSc: the
    // entries that move to other ranks travel in one bulk exchange.
    check(MatSeqAIJSetPreallocationCSR(forward, row_ptr.data(), cols.data(), vals.data()),
          "MatSeqAIJSetPreallocationCSR");
    check(MatMPIAIJSetPreallocationCSR(forward, row_ptr.data(), cols.data(), vals.data()),
          "MatMPIAIJSetPreallocationCSR");
    // Free our copy before the transpose doubles the matrix memory.
    std::vector<PetscInt>().swap(cols);
    std::vector<PetscScalar>().swap(vals);
    std::vector<PetscInt>().swap(row_ptr);

    TransposedChain out;
    out.time = in.time;
    out.states = static_cast<PetscInt>(in.states);
    check(MatTranspose(forward, MAT_INITIAL_MATRIX, out.matrix.out()), "MatTranspose");
    forward.reset();
    double global_max = 0;
    MPI_Allreduce(&max_exit, &global_max, 1, MPI_DOUBLE, MPI_MAX, comm);
    // A ctmc with no transitions at all has no scale; 1 keeps the residual defined.
    out.uniformisation = ctmc ? (global_max > 0 ? global_max : 1.0) : 1.0;
    return out;
}

VecHandle create_state_vector(const TransposedChain& a) {
    VecHandle v;
    check(MatCreateVecs(a.matrix, v.out(), nullptr), "MatCreateVecs");
    return v;
}

} // namespace longrun::solve

// The numerical core on whichever PETSc it was built against: the 32-bit-index
// default or, with -DLONGRUN_INDEX64=ON, Debian's 64-bit-index variant. The
// build's index size is checked first (a 64-bit build that silently picked up
// the 32-bit PETSc would pass everything else), then an M/M/c/K queue split over
// the ranks is assembled and solved by linear, eigen and aggregation,
// against its closed form. Links only the solver library: no HDF5 files, no CLI.
#include "solve/assemble.hpp"
#include "solve/strategy.hpp"

#include <gtest/gtest.h>
#include <mpi.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <vector>

namespace {

using namespace longrun;

// Birth-death ctmc on 0..K, source rows in CSR: birth lambda below K, death
// min(n, c) mu above 0.
struct SourceCsr {
    std::vector<std::uint64_t> offsets{0}, targets;
    std::vector<double> weights;
};

SourceCsr birth_death_rows(int c, int K, double lambda, double mu, std::uint64_t begin,
                           std::uint64_t end) {
    SourceCsr csr;
    for (std::uint64_t n = begin; n < end; ++n) {
        if (n > 0) {
            csr.targets.push_back(n - 1);
            csr.weights.push_back(std::min<double>(static_cast<double>(n), c) * mu);
        }
        if (n < static_cast<std::uint64_t>(K)) {
            csr.targets.push_back(n + 1);
            csr.weights.push_back(lambda);
        }
        csr.offsets.push_back(csr.targets.size());
    }
    return csr;
}

// M/M/c/K steady state: p_n = p_0 a^n / n! for n < c, p_0 a^n / (c! c^(n-c)) for
// n >= c, a = lambda/mu (Gross & Harris, Fundamentals of Queueing Theory, the
// M/M/c/K model).
std::vector<double> mmck(int c, int K, double lambda, double mu) {
    std::vector<double> p(K + 1);
    double term = 1, total = 0;
    for (int n = 0; n <= K; ++n) {
        if (n > 0)
            term *= lambda / mu / std::min(n, c);
        p[n] = term;
        total += term;
    }
    for (double& x : p)
        x /= total;
    return p;
}

TEST(Index64, PetscIntMatchesTheBuildOption) {
#ifdef LONGRUN_INDEX64
    EXPECT_EQ(sizeof(PetscInt), 8u) << "LONGRUN_INDEX64 build, but PETSc's indices are not 64-bit";
#else
    EXPECT_EQ(sizeof(PetscInt), 4u) << "default build, but PETSc's indices are not 32-bit";
#endif
}

TEST(Index64, MmckSolvedByEveryIterativeMethod) {
    int rank = 0, size = 1;
    MPI_Comm_rank(MPI_COMM_WORLD, &rank);
    MPI_Comm_size(MPI_COMM_WORLD, &size);
    const int c = 3, K = 400;
    const double lambda = 2.4, mu = 1.0;
    const std::uint64_t states = K + 1;
    const std::uint64_t begin = states * rank / size, end = states * (rank + 1) / size;
    const SourceCsr csr = birth_death_rows(c, K, lambda, mu, begin, end);
    const solve::LocalRows rows{solve::TimeModel::continuous,
                                states,
                                RowRange{begin, end},
                                csr.offsets,
                                csr.targets,
                                csr.weights};
    const solve::TransposedChain a = solve::assemble_transposed(MPI_COMM_WORLD, rows);
    EXPECT_EQ(a.states, static_cast<PetscInt>(states));
    const std::vector<double> exact = mmck(c, K, lambda, mu);
    for (const char* method : {"linear", "eigen", "aggregation"}) {
        solve::MethodSettings settings;
        settings.tolerance = 1e-12;
        const solve::SolveOutcome out = solve::solve_stationary(a, method, settings);
        ASSERT_TRUE(out.pi) << method; // the same on every rank: met is a global verdict
        const PetscScalar* v = nullptr;
        double local_error = INFINITY; // reduced below, never asserted on one rank
        if (VecGetArrayRead(out.pi, &v) == 0) {
            local_error = 0;
            for (std::uint64_t i = begin; i < end; ++i)
                local_error += std::abs(v[i - begin] - exact[i]);
            VecRestoreArrayRead(out.pi, &v);
        }
        double error = 0;
        MPI_Allreduce(&local_error, &error, 1, MPI_DOUBLE, MPI_SUM, MPI_COMM_WORLD);
        EXPECT_TRUE(out.met) << method << ": " << out.certificate.residual;
        // Residual 1e-12 on a chain this well conditioned: 1e-9 in the 1-norm
        // leaves room for the condition number (common practice).
        EXPECT_LT(error, 1e-9) << method;
    }
}

} // namespace

// `direct`: sparse LU (MUMPS by default) of the pinned system. One row of
// A = Q^T (or P^T - I) is replaced by d e_p^T with x_p = 1, which makes the
// singular system non-singular; d is the row's own diagonal magnitude, so the
// pinned row keeps the scale of its neighbours. The pin is a state of large
// probability (the largest entry of the warm start or of a few lazy power
// steps, or -direct_pin STATE): pinning a state of tiny probability scales the
// system badly. Options prefix: -direct_.
//   -direct_pin STATE
//   -direct_mat_solver_type mumps|superlu_dist   (default mumps)
//   -direct_mat_mumps_icntl_N ...                 (MUMPS's own controls)
//
// The factorisation is split into analysis and numbers so that MUMPS's own
// memory estimate (after analysis, before any large allocation) can be held
// against settings.memory_limit_bytes. Further rounds are iterative refinement
// with the same factors: r = b - M x, x += M^{-1} r.
#include "method.hpp"

#include "error_goal.hpp"
#include "iterate_start.hpp"

#include <fmt/format.h>

#include <cmath>
#include <string>

namespace longrun::solve {

namespace {

// Bytes per state per rank when the solver gives no estimate of its own; errs
// high on purpose (the 1,002,001-state tandem line needed about 3,000 bytes per
// state with MUMPS, DESIGN.md).
constexpr double rough_bytes_per_state = 3200;

PetscInt choose_pin(const TransposedChain& a, Vec warm_start, Attempt& attempt) {
    PetscInt chosen = -1;
    PetscBool given = PETSC_FALSE;
    check(PetscOptionsGetInt(nullptr, "direct_", "-pin", &chosen, &given), "PetscOptionsGetInt");
    if (given) {
        if (chosen < 0 || chosen >= a.states)
            throw UsageError(
                fmt::format("-direct_pin {} is not a state (0..{})", chosen, a.states - 1));
        attempt.notes.push_back(fmt::format("pinning state {} (-direct_pin)", chosen));
        return chosen;
    }
    VecHandle estimate = starting_iterate(a, warm_start);
    if (!warm_start)
        lazy_steps(a, estimate, 50);
    normalise(estimate);
    const auto [pin, value] = largest_entry(estimate);
    attempt.notes.push_back(fmt::format("pinning state {}, the largest entry of {} ({:.2e})", pin,
                                        warm_start ? "the warm start" : "50 lazy power steps",
                                        value));
    return pin;
}

} // namespace

Attempt run_direct(const TransposedChain& a, Vec warm_start, const MethodSettings& s) {
    MPI_Comm comm = PetscObjectComm((PetscObject)a.matrix.get());
    int ranks = 1;
    MPI_Comm_size(comm, &ranks);
    Attempt attempt;
    attempt.method = "direct";
    if (s.progress)
        s.progress->begin("direct", s.tolerance);

    char solver_type[64] = MATSOLVERMUMPS;
    check(PetscOptionsGetString(nullptr, "direct_", "-mat_solver_type", solver_type,
                                sizeof solver_type, nullptr),
          "PetscOptionsGetString");
    const bool mumps = std::string(solver_type) == MATSOLVERMUMPS;

    // Rough check first: no analysis at all when even an optimistic third of the
    // rough estimate is over the limit.
    const double rough = rough_bytes_per_state * double(a.states) / ranks;
    if (s.memory_limit_bytes > 0 && rough / 3 > double(s.memory_limit_bytes))
        throw MethodDeclined(fmt::format("LU factors of {} states need about {:.3g} MB per "
                                         "rank (rough estimate), over the limit of {:.3g} MB",
                                         a.states, rough / 1048576.0,
                                         s.memory_limit_bytes / 1048576.0));

    const PetscInt pin = choose_pin(a, warm_start, attempt);

    MatHandle m;
    check(MatDuplicate(a.matrix, MAT_COPY_VALUES, m.out()), "MatDuplicate");
    if (a.time == TimeModel::discrete)
        check(MatShift(m, -1.0), "MatShift");
    VecHandle diagonal = create_state_vector(a);
    check(MatGetDiagonal(m, diagonal), "MatGetDiagonal");
    double d = std::abs(entry_at(diagonal, pin));
    if (!(d > 0))
        d = 1;
    PetscInt lo = 0, hi = 0;
    check(MatGetOwnershipRange(m, &lo, &hi), "MatGetOwnershipRange");
    const bool mine = pin >= lo && pin < hi;
    check(MatZeroRows(m, mine ? 1 : 0, &pin, d, nullptr, nullptr), "MatZeroRows");
    VecHandle b = create_state_vector(a);
    check(VecSet(b, 0.0), "VecSet");
    if (mine)
        check(VecSetValue(b, pin, d, INSERT_VALUES), "VecSetValue");
    check(VecAssemblyBegin(b), "VecAssemblyBegin");
    check(VecAssemblyEnd(b), "VecAssemblyEnd");

    PetscBool available = PETSC_FALSE;
    check(MatGetFactorAvailable(m, solver_type, MAT_FACTOR_LU, &available),
          "MatGetFactorAvailable");
    if (!available)
        throw MethodDeclined(fmt::format("this PETSc build has no parallel LU '{}'", solver_type));
    // MUMPS reads -direct_mat_mumps_* through the matrix's prefix.
    check(MatSetOptionsPrefix(m, "direct_"), "MatSetOptionsPrefix");
    MatHandle factor;
    check(MatGetFactor(m, solver_type, MAT_FACTOR_LU, factor.out()), "MatGetFactor");
    check(MatSetOptionsPrefix(factor, "direct_"), "MatSetOptionsPrefix");
    MatFactorInfo info;
    check(MatFactorInfoInitialize(&info), "MatFactorInfoInitialize");
    check(MatLUFactorSymbolic(factor, m, nullptr, nullptr, &info), "MatLUFactorSymbolic");

    double estimate = rough; // bytes on the most demanding rank
    if (mumps) {
        // INFOG(16): MUMPS's estimate, in MB, of the in-core factorisation on the
        // most demanding rank; a global value, so every rank decides alike.
        PetscInt megabytes = 0;
        check(MatMumpsGetInfog(factor, 16, &megabytes), "MatMumpsGetInfog");
        estimate = double(megabytes) * 1048576.0;
    }
    attempt.notes.push_back(fmt::format("{} LU of {} states, factor memory estimate {:.3g} MB per "
                                        "rank{}",
                                        solver_type, a.states, estimate / 1048576.0,
                                        mumps ? " (MUMPS analysis)" : " (rough, per state)"));
    if (s.progress)
        s.progress->note("direct: " + attempt.notes.back());
    if (s.memory_limit_bytes > 0 && estimate > double(s.memory_limit_bytes))
        throw MethodDeclined(fmt::format("LU factors need about {:.3g} MB per rank, over "
                                         "the limit of {:.3g} MB",
                                         estimate / 1048576.0, s.memory_limit_bytes / 1048576.0));
    check(MatLUFactorNumeric(factor, m, &info), "MatLUFactorNumeric");

    VecHandle x = create_state_vector(a), r = create_state_vector(a);
    VecHandle correction = create_state_vector(a), candidate = create_state_vector(a);
    check(MatSolve(factor, b, x), "MatSolve");
    // Refinement with exact factors: at the rounding floor its corrections
    // measure the rounding error of the solve itself (error_goal.hpp).
    ErrorGoal goal(s, true);
    for (int round = 0; round < std::max(1, s.max_rounds); ++round) {
        if (round > 0) { // iterative refinement with the same factors
            check(MatMult(m, x, r), "MatMult");
            check(VecAYPX(r, -1.0, b), "VecAYPX"); // r = b - M x
            check(MatSolve(factor, r, correction), "MatSolve");
            check(VecAXPY(x, 1.0, correction), "VecAXPY");
        }
        check(VecCopy(x, candidate), "VecCopy");
        Certificate c = certify(a, candidate);
        const bool done = goal.judge(candidate, c);
        ++attempt.iterations;
        record_iteration(attempt, round, c.valid ? c.residual : INFINITY, s);
        attempt.notes.push_back(
            fmt::format("{}: certified residual {:.3e}{}",
                        round == 0 ? "solve" : "refinement " + std::to_string(round), c.residual,
                        c.valid ? "" : " (" + c.problem + ")"));
        keep_if_better(attempt, a, candidate, c);
        if (done) {
            if (goal.gave_up())
                attempt.notes.push_back(goal.stop_reason());
            break;
        }
    }
    attempt.notes.push_back("corrections " + goal.summary());
    return attempt;
}

} // namespace longrun::solve

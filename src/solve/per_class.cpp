#include "per_class.hpp"

#include "io/error.hpp"

#include <fmt/format.h>

#include <stdexcept>
#include <unordered_map>

namespace longrun::solve {

std::vector<std::uint32_t> positions_within_classes(const std::vector<std::uint32_t>& class_of) {
    std::unordered_map<std::uint32_t, std::uint32_t> next;
    std::vector<std::uint32_t> position(class_of.size());
    for (std::size_t v = 0; v < class_of.size(); ++v)
        position[v] = next[class_of[v]]++;
    return position;
}

LocalRows ClassChain::rows() const {
    LocalRows r;
    r.time = time;
    r.states = size;
    r.rows = positions;
    r.offsets = offsets;
    r.targets = targets;
    r.weights = weights;
    return r;
}

ClassChain restrict_to_class(MPI_Comm comm, const LocalRows& full,
                             const std::vector<std::uint32_t>& class_of,
                             const std::vector<std::uint32_t>& position, std::uint32_t k) {
    ClassChain c;
    c.time = full.time;
    std::uint64_t first = 0;
    bool any = false;
    for (std::size_t i = 0; i < full.rows.size(); ++i) {
        const std::uint64_t v = full.rows.begin + i;
        if (class_of[v] != k)
            continue;
        if (!any)
            first = position[v];
        any = true;
        c.local_states.push_back(v);
        for (auto e = full.offsets[i]; e < full.offsets[i + 1]; ++e) {
            // A closed class has no edge of positive weight leaving it; zero
            // weights may point anywhere and are dropped.
            if (class_of[full.targets[e]] != k)
                continue;
            c.targets.push_back(position[full.targets[e]]);
            c.weights.push_back(full.weights[e]);
        }
        c.offsets.push_back(c.targets.size());
    }
    std::uint64_t mine = c.local_states.size();
    MPI_Allreduce(&mine, &c.size, 1, MPI_UINT64_T, MPI_SUM, comm);
    // Positions are numbered in chain order, so this rank's rows start where the
    // lower ranks' rows of the class end (also for a rank with none).
    std::uint64_t below = 0;
    MPI_Exscan(&mine, &below, 1, MPI_UINT64_T, MPI_SUM, comm);
    int rank = 0;
    MPI_Comm_rank(comm, &rank);
    if (rank == 0)
        below = 0; // MPI_Exscan leaves rank 0's result undefined
    if (any && first != below)
        throw std::logic_error("class positions are not contiguous across ranks");
    c.positions = {below, below + mine};
    return c;
}

Absorption absorption_probabilities(MPI_Comm comm, const TransposedChain& a, const LocalRows& full,
                                    const std::vector<std::uint32_t>& class_of, std::size_t classes,
                                    const std::vector<double>& start, const MethodSettings& s) {
    Absorption out;
    std::vector<double> direct(classes, 0.0); // start mass already inside a class
    std::vector<PetscInt> transient;
    std::vector<double> start_transient;
    for (std::size_t i = 0; i < full.rows.size(); ++i) {
        const std::uint64_t v = full.rows.begin + i;
        if (class_of[v] == transient_class) {
            transient.push_back(static_cast<PetscInt>(v));
            start_transient.push_back(start[i]);
        } else {
            direct[class_of[v]] += start[i];
        }
    }
    std::uint64_t local_t = transient.size(), total_t = 0;
    MPI_Allreduce(&local_t, &total_t, 1, MPI_UINT64_T, MPI_SUM, comm);
    std::vector<double> through(classes, 0.0);
    if (total_t > 0) {
        // A_TT = (Q_TT)^T or (P_TT)^T; the system for x is (-Q_TT)^T x = start_T,
        // resp. (I - P_TT)^T x = start_T.
        IS rows_is = nullptr;
        check(ISCreateGeneral(comm, static_cast<PetscInt>(transient.size()), transient.data(),
                              PETSC_COPY_VALUES, &rows_is),
              "ISCreateGeneral");
        MatHandle att;
        const PetscErrorCode sub =
            MatCreateSubMatrix(a.matrix, rows_is, rows_is, MAT_INITIAL_MATRIX, att.out());
        ISDestroy(&rows_is);
        check(sub, "MatCreateSubMatrix");
        if (a.time == TimeModel::continuous) {
            check(MatScale(att, -1.0), "MatScale");
        } else {
            check(MatScale(att, -1.0), "MatScale");
            check(MatShift(att, 1.0), "MatShift");
        }
        VecHandle x, b;
        check(MatCreateVecs(att, x.out(), b.out()), "MatCreateVecs");
        {
            PetscScalar* bv = nullptr;
            check(VecGetArray(b, &bv), "VecGetArray");
            std::copy(start_transient.begin(), start_transient.end(), bv);
            check(VecRestoreArray(b, &bv), "VecRestoreArray");
        }
        KspHandle ksp;
        check(KSPCreate(comm, ksp.out()), "KSPCreate");
        check(KSPSetOptionsPrefix(ksp, "absorb_"), "KSPSetOptionsPrefix");
        check(KSPSetOperators(ksp, att, att), "KSPSetOperators");
        check(KSPSetType(ksp, KSPGMRES), "KSPSetType");
        PC pc = nullptr;
        check(KSPGetPC(ksp, &pc), "KSPGetPC");
#if defined(PETSC_HAVE_HYPRE)
        check(PCSetType(pc, PCHYPRE), "PCSetType");
#endif
        check(KSPSetTolerances(ksp, std::min(1e-12, s.tolerance), 1e-300, PETSC_DEFAULT, 10000),
              "KSPSetTolerances");
        check(KSPSetFromOptions(ksp), "KSPSetFromOptions");
        check(KSPSolve(ksp, b, x), "KSPSolve");
        PetscInt its = 0;
        check(KSPGetIterationNumber(ksp, &its), "KSPGetIterationNumber");
        out.iterations = its;
        {
            VecHandle r;
            check(VecDuplicate(b, r.out()), "VecDuplicate");
            check(MatMult(att, x, r), "MatMult");
            check(VecAYPX(r, -1.0, b), "VecAYPX");
            PetscReal rn = 0, bn = 0;
            check(VecNorm(r, NORM_1, &rn), "VecNorm");
            check(VecNorm(b, NORM_1, &bn), "VecNorm");
            out.residual = bn > 0 ? rn / bn : rn;
        }
        const PetscScalar* xv = nullptr;
        check(VecGetArrayRead(x, &xv), "VecGetArrayRead");
        std::size_t t = 0;
        for (std::size_t i = 0; i < full.rows.size(); ++i) {
            const std::uint64_t v = full.rows.begin + i;
            if (class_of[v] != transient_class)
                continue;
            const double time_in_v = xv[t++];
            for (auto e = full.offsets[i]; e < full.offsets[i + 1]; ++e) {
                const auto k = class_of[full.targets[e]];
                if (k != transient_class && full.targets[e] != v)
                    through[k] += time_in_v * full.weights[e];
            }
        }
        check(VecRestoreArrayRead(x, &xv), "VecRestoreArrayRead");
    }
    std::vector<double> local(classes), total(classes);
    for (std::size_t k = 0; k < classes; ++k)
        local[k] = direct[k] + through[k];
    if (classes > 0)
        MPI_Allreduce(local.data(), total.data(), static_cast<int>(classes), MPI_DOUBLE, MPI_SUM,
                      comm);
    out.probability = std::move(total);
    return out;
}

} // namespace longrun::solve

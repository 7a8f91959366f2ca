#include "aggregation_level.hpp"

#include <algorithm>
#include <cmath>

namespace longrun::solve {

namespace {

// Copies a sequential AIJ block's CSR (columns mapped by `map_column`).
template <class MapColumn>
void append_rows(Mat block, PetscInt rows, LocalCsr& out, MapColumn map_column) {
    out.row_start.assign(1, 0);
    out.column.clear();
    out.value.clear();
    if (!block) {
        out.row_start.assign(static_cast<std::size_t>(rows) + 1, 0);
        return;
    }
    PetscInt n = 0;
    const PetscInt *ia = nullptr, *ja = nullptr;
    PetscBool done = PETSC_FALSE;
    check(MatGetRowIJ(block, 0, PETSC_FALSE, PETSC_FALSE, &n, &ia, &ja, &done), "MatGetRowIJ");
    if (!done)
        throw LibraryError("aggregation: the matrix gives no CSR access");
    const PetscScalar* v = nullptr;
    check(MatSeqAIJGetArrayRead(block, &v), "MatSeqAIJGetArrayRead");
    out.row_start.resize(static_cast<std::size_t>(n) + 1);
    out.column.resize(static_cast<std::size_t>(ia[n]));
    out.value.assign(v, v + ia[n]);
    for (PetscInt i = 0; i <= n; ++i)
        out.row_start[i] = ia[i];
    for (PetscInt k = 0; k < ia[n]; ++k)
        out.column[k] = map_column(ja[k]);
    check(MatSeqAIJRestoreArrayRead(block, &v), "MatSeqAIJRestoreArrayRead");
    check(MatRestoreRowIJ(block, 0, PETSC_FALSE, PETSC_FALSE, &n, &ia, &ja, &done),
          "MatRestoreRowIJ");
}

} // namespace

void connect_level(AggregationLevel& level) {
    check(VecCreateMPI(level.comm, level.local, level.global, level.x.out()), "VecCreateMPI");
    const auto n_ghosts = static_cast<PetscInt>(level.ghost_global.size());
    check(VecCreateSeq(PETSC_COMM_SELF, n_ghosts, level.ghosts.out()), "VecCreateSeq");
    IsHandle from;
    check(ISCreateGeneral(PETSC_COMM_SELF, n_ghosts, level.ghost_global.data(), PETSC_COPY_VALUES,
                          from.out()),
          "ISCreateGeneral");
    check(VecScatterCreate(level.x, from, level.ghosts, nullptr, level.to_ghosts.out()),
          "VecScatterCreate");
    level.diagonal_at.assign(static_cast<std::size_t>(level.local), -1);
    for (PetscInt i = 0; i < level.local; ++i)
        for (PetscInt k = level.owned.row_start[i]; k < level.owned.row_start[i + 1]; ++k)
            if (level.owned.column[k] == i)
                level.diagonal_at[i] = k;
}

AggregationLevel finest_level(const TransposedChain& a) {
    AggregationLevel level;
    level.comm = PetscObjectComm((PetscObject)a.matrix.get());
    PetscInt end = 0;
    check(MatGetOwnershipRange(a.matrix, &level.begin, &end), "MatGetOwnershipRange");
    level.local = end - level.begin;
    level.global = a.states;
    PetscBool parallel = PETSC_FALSE;
    check(PetscObjectTypeCompare((PetscObject)a.matrix.get(), MATMPIAIJ, &parallel),
          "PetscObjectTypeCompare");
    Mat owned = a.matrix, ghost = nullptr;
    const PetscInt* ghost_columns = nullptr;
    if (parallel)
        check(MatMPIAIJGetSeqAIJ(a.matrix, &owned, &ghost, &ghost_columns), "MatMPIAIJGetSeqAIJ");
    append_rows(owned, level.local, level.owned, [](PetscInt j) { return j; });
    append_rows(ghost, level.local, level.ghost, [](PetscInt j) { return j; });
    if (ghost) {
        PetscInt rows = 0, cols = 0;
        check(MatGetLocalSize(ghost, &rows, &cols), "MatGetLocalSize");
        level.ghost_global.assign(ghost_columns, ghost_columns + cols); // PETSc keeps them sorted
    }
    connect_level(level);
    for (PetscInt i = 0; i < level.local; ++i) {
        if (level.diagonal_at[i] < 0)
            throw LibraryError("aggregation: a row of A has no stored diagonal");
        if (a.time == TimeModel::discrete) // P^T - I
            level.owned.value[level.diagonal_at[i]] -= 1.0;
    }
    return level;
}

void AggregationLevel::update_ghosts() {
    check(VecScatterBegin(to_ghosts, x, ghosts, INSERT_VALUES, SCATTER_FORWARD), "VecScatterBegin");
    check(VecScatterEnd(to_ghosts, x, ghosts, INSERT_VALUES, SCATTER_FORWARD), "VecScatterEnd");
}

void AggregationLevel::sweep(bool forward) {
    update_ghosts();
    PetscScalar* xv = nullptr;
    const PetscScalar* gv = nullptr;
    check(VecGetArray(x, &xv), "VecGetArray");
    check(VecGetArrayRead(ghosts, &gv), "VecGetArrayRead");
    const PetscInt* rs = owned.row_start.data();
    const PetscInt* col = owned.column.data();
    const double* val = owned.value.data();
    const PetscInt* grs = ghost.row_start.data();
    const PetscInt* gcol = ghost.column.data();
    const double* gval = ghost.value.data();
    auto relax = [&](PetscInt i) {
        double s = 0;
        for (PetscInt k = rs[i]; k < rs[i + 1]; ++k)
            s += val[k] * xv[col[k]];
        for (PetscInt k = grs[i]; k < grs[i + 1]; ++k)
            s += gval[k] * gv[gcol[k]];
        const double d = val[diagonal_at[i]];
        s -= d * xv[i];
        // In an M-matrix the new value is a positive combination of the others,
        // so positivity of the iterate survives every sweep.
        if (d != 0)
            xv[i] = -s / d;
    };
    if (forward)
        for (PetscInt i = 0; i < local; ++i)
            relax(i);
    else
        for (PetscInt i = local - 1; i >= 0; --i)
            relax(i);
    check(VecRestoreArrayRead(ghosts, &gv), "VecRestoreArrayRead");
    check(VecRestoreArray(x, &xv), "VecRestoreArray");
}

CoarseOperator::CoarseOperator(const AggregationLevel& fine, std::vector<PetscInt> aggregate,
                               PetscInt count)
    : aggregate_(std::move(aggregate)) {
    AggregationLevel& c = coarse_;
    c.comm = fine.comm;
    c.local = count;
    MPI_Allreduce(&count, &c.global, 1, MPIU_INT, MPI_SUM, fine.comm);
    MPI_Exscan(&count, &c.begin, 1, MPIU_INT, MPI_SUM, fine.comm);
    int rank = 0;
    MPI_Comm_rank(fine.comm, &rank);
    if (rank == 0)
        c.begin = 0;

    // The global aggregate of every ghost column: aggregate numbers travel as doubles
    // (exact below 2^53) along the fine level's own ghost scatter.
    VecHandle numbers, ghost_numbers;
    check(VecDuplicate(fine.x, numbers.out()), "VecDuplicate");
    check(VecDuplicate(fine.ghosts, ghost_numbers.out()), "VecDuplicate");
    {
        PetscScalar* v = nullptr;
        check(VecGetArray(numbers, &v), "VecGetArray");
        for (PetscInt i = 0; i < fine.local; ++i)
            v[i] = static_cast<double>(c.begin + aggregate_[i]);
        check(VecRestoreArray(numbers, &v), "VecRestoreArray");
    }
    check(VecScatterBegin(fine.to_ghosts, numbers, ghost_numbers, INSERT_VALUES, SCATTER_FORWARD),
          "VecScatterBegin");
    check(VecScatterEnd(fine.to_ghosts, numbers, ghost_numbers, INSERT_VALUES, SCATTER_FORWARD),
          "VecScatterEnd");
    std::vector<PetscInt> ghost_aggregate(fine.ghost_global.size());
    {
        const PetscScalar* v = nullptr;
        check(VecGetArrayRead(ghost_numbers, &v), "VecGetArrayRead");
        for (std::size_t g = 0; g < ghost_aggregate.size(); ++g)
            ghost_aggregate[g] = static_cast<PetscInt>(std::llround(v[g]));
        check(VecRestoreArrayRead(ghost_numbers, &v), "VecRestoreArrayRead");
    }
    c.ghost_global = ghost_aggregate;
    std::sort(c.ghost_global.begin(), c.ghost_global.end());
    c.ghost_global.erase(std::unique(c.ghost_global.begin(), c.ghost_global.end()),
                         c.ghost_global.end());
    std::vector<PetscInt> ghost_slot(ghost_aggregate.size());
    for (std::size_t g = 0; g < ghost_aggregate.size(); ++g)
        ghost_slot[g] = static_cast<PetscInt>(
            std::lower_bound(c.ghost_global.begin(), c.ghost_global.end(), ghost_aggregate[g]) -
            c.ghost_global.begin());

    // Fine rows grouped by aggregate (counting sort).
    std::vector<PetscInt> first(static_cast<std::size_t>(count) + 1, 0), members(fine.local);
    for (PetscInt i = 0; i < fine.local; ++i)
        ++first[aggregate_[i] + 1];
    for (PetscInt I = 0; I < count; ++I)
        first[I + 1] += first[I];
    {
        std::vector<PetscInt> fill(first.begin(), first.end() - 1);
        for (PetscInt i = 0; i < fine.local; ++i)
            members[fill[aggregate_[i]]++] = i;
    }

    // Coarse row I gathers the entries of its fine rows. A marker per coarse
    // column (the slot it got in the row being built) avoids sorting: the
    // columns of a coarse row stay in order of first appearance, which nothing
    // downstream minds.
    owned_target_.assign(fine.owned.column.size(), 0);
    ghost_target_.assign(fine.ghost.column.size(), 0);
    std::vector<PetscInt> owned_slot(static_cast<std::size_t>(count), -1);
    std::vector<PetscInt> ghost_slot_in_row(c.ghost_global.size(), -1);
    c.owned.column.reserve(fine.owned.column.size() / 2 + 1);
    for (PetscInt I = 0; I < count; ++I) {
        const auto owned_base = static_cast<PetscInt>(c.owned.column.size());
        const auto ghost_base = static_cast<PetscInt>(c.ghost.column.size());
        owned_slot[I] = owned_base; // the diagonal first: every coarse row has one
        c.owned.column.push_back(I);
        for (PetscInt m = first[I]; m < first[I + 1]; ++m) {
            const PetscInt i = members[m];
            for (PetscInt k = fine.owned.row_start[i]; k < fine.owned.row_start[i + 1]; ++k) {
                const PetscInt J = aggregate_[fine.owned.column[k]];
                if (owned_slot[J] < owned_base) {
                    owned_slot[J] = static_cast<PetscInt>(c.owned.column.size());
                    c.owned.column.push_back(J);
                }
                owned_target_[k] = owned_slot[J];
            }
            for (PetscInt k = fine.ghost.row_start[i]; k < fine.ghost.row_start[i + 1]; ++k) {
                const PetscInt G = ghost_slot[fine.ghost.column[k]];
                if (ghost_slot_in_row[G] < ghost_base) {
                    ghost_slot_in_row[G] = static_cast<PetscInt>(c.ghost.column.size());
                    c.ghost.column.push_back(G);
                }
                ghost_target_[k] = -1 - ghost_slot_in_row[G];
            }
        }
        c.owned.row_start.push_back(static_cast<PetscInt>(c.owned.column.size()));
        c.ghost.row_start.push_back(static_cast<PetscInt>(c.ghost.column.size()));
    }
    c.owned.value.assign(c.owned.column.size(), 0.0);
    c.ghost.value.assign(c.ghost.column.size(), 0.0);
    connect_level(c);
}

void CoarseOperator::numeric(AggregationLevel& fine, double floor_ratio) {
    fine.update_ghosts();
    PetscReal largest = 0;
    if (floor_ratio > 0)
        check(VecNorm(fine.x, NORM_INFINITY, &largest), "VecNorm");
    // Relative to the level, not to each aggregate: an aggregate whose entries all
    // underflowed has no scale of its own. Owned and ghost values share the one
    // (global) floor, so every rank builds the same coarse chain.
    floor_ = floor_ratio * largest;
    const double lift = floor_;
    AggregationLevel& c = coarse_;
    std::fill(c.owned.value.begin(), c.owned.value.end(), 0.0);
    std::fill(c.ghost.value.begin(), c.ghost.value.end(), 0.0);
    const PetscScalar* xv = nullptr;
    const PetscScalar* gv = nullptr;
    check(VecGetArrayRead(fine.x, &xv), "VecGetArrayRead");
    check(VecGetArrayRead(fine.ghosts, &gv), "VecGetArrayRead");
    double* owned_out = c.owned.value.data();
    double* ghost_out = c.ghost.value.data();
    auto add = [&](PetscInt target, double v) {
        if (target >= 0)
            owned_out[target] += v;
        else
            ghost_out[-1 - target] += v;
    };
    const std::size_t n_owned = fine.owned.column.size();
    for (std::size_t k = 0; k < n_owned; ++k)
        add(owned_target_[k], fine.owned.value[k] * std::max(xv[fine.owned.column[k]], lift));
    const std::size_t n_ghost = fine.ghost.column.size();
    for (std::size_t k = 0; k < n_ghost; ++k)
        add(ghost_target_[k], fine.ghost.value[k] * std::max(gv[fine.ghost.column[k]], lift));
    check(VecRestoreArrayRead(fine.ghosts, &gv), "VecRestoreArrayRead");
    check(VecRestoreArrayRead(fine.x, &xv), "VecRestoreArrayRead");
}

void CoarseOperator::prolong(AggregationLevel& fine) {
    PetscScalar* xv = nullptr;
    const PetscScalar* cv = nullptr;
    check(VecGetArray(fine.x, &xv), "VecGetArray");
    check(VecGetArrayRead(coarse_.x, &cv), "VecGetArrayRead");
    const double lift = floor_;
    for (PetscInt i = 0; i < fine.local; ++i) {
        // A lifted aggregate may get a huge factor while the chain is far from its
        // answer (mass the coarse chain expects where the floor stands in for it);
        // a product that overflows is dropped, so the sweeps see no inf or NaN.
        const double scaled = std::max(xv[i], lift) * cv[aggregate_[i]];
        if (std::isfinite(scaled) && scaled >= 0)
            xv[i] = scaled;
    }
    check(VecRestoreArrayRead(coarse_.x, &cv), "VecRestoreArrayRead");
    check(VecRestoreArray(fine.x, &xv), "VecRestoreArray");
}

} // namespace longrun::solve

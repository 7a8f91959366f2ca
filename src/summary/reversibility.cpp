#include "reversibility.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <utility>
#include <vector>

namespace longrun::summary {

namespace {

using solve::check;
using solve::MatHandle;
using solve::VecHandle;

// One local row of a matrix as (column, value) pairs in increasing column order.
// MPIAIJ rows come out sorted already; the sort is a guard, not a cost.
void read_row(Mat m, PetscInt row, std::vector<std::pair<PetscInt, double>>& out) {
    PetscInt n = 0;
    const PetscInt* cols = nullptr;
    const PetscScalar* vals = nullptr;
    check(MatGetRow(m, row, &n, &cols, &vals), "MatGetRow");
    out.clear();
    for (PetscInt k = 0; k < n; ++k)
        out.emplace_back(cols[k], std::max(0.0, static_cast<double>(vals[k])));
    check(MatRestoreRow(m, row, &n, &cols, &vals), "MatRestoreRow");
    if (!std::is_sorted(out.begin(), out.end()))
        std::sort(out.begin(), out.end());
}

} // namespace

DetailedBalance check_detailed_balance(const solve::TransposedChain& a, Vec pi, double flow_floor) {
    const MPI_Comm comm = PetscObjectComm(reinterpret_cast<PetscObject>(a.matrix.get()));

    // Negative entries would make negative "flows" that cancel real ones.
    VecHandle weights;
    check(VecDuplicate(pi, weights.out()), "VecDuplicate");
    check(VecCopy(pi, weights), "VecCopy");
    {
        PetscInt n = 0;
        PetscScalar* v = nullptr;
        check(VecGetLocalSize(weights, &n), "VecGetLocalSize");
        check(VecGetArray(weights, &v), "VecGetArray");
        for (PetscInt i = 0; i < n; ++i)
            v[i] = std::max<PetscScalar>(v[i], 0);
        check(VecRestoreArray(weights, &v), "VecRestoreArray");
    }

    // A holds q_ji in row i, so G = A diag(pi) holds f_ji = pi_j q_ji there and its
    // transpose F holds f_ij: row i of F and G side by side give both directions of
    // every pair that has a transition either way, on the rank that owns i.
    MatHandle g, f;
    check(MatDuplicate(a.matrix, MAT_COPY_VALUES, g.out()), "MatDuplicate");
    check(MatDiagonalScale(g, nullptr, weights), "MatDiagonalScale");
    weights.reset();
    check(MatTranspose(g, MAT_INITIAL_MATRIX, f.out()), "MatTranspose");
    PetscInt begin = 0, end = 0;
    check(MatGetOwnershipRange(f, &begin, &end), "MatGetOwnershipRange");

    std::vector<std::pair<PetscInt, double>> out_row, in_row;
    double local_total = 0;
    for (PetscInt i = begin; i < end; ++i) {
        read_row(f, i, out_row);
        for (const auto& [j, x] : out_row)
            if (j != i)
                local_total += x;
    }
    DetailedBalance b;
    MPI_Allreduce(&local_total, &b.total_flow, 1, MPI_DOUBLE, MPI_SUM, comm);
    // The smallest normal double keeps a chain with no flow at all (pi on
    // absorbing states only) from judging pairs of zero flow.
    b.floor = std::max(flow_floor * b.total_flow, std::numeric_limits<double>::min());

    // Each unordered pair {i, j} is judged once, in row min(i, j).
    double worst = -1, imbalance = 0;
    std::uint64_t from = 0, to = 0;
    double worst_flow = 0;
    std::uint64_t checked = 0, below = 0, one_way = 0;
    auto judge = [&](PetscInt i, PetscInt j, double fij, double fji) {
        const double larger = std::max(fij, fji);
        if (larger == 0)
            return; // a stored zero weight: no transition either way
        if (larger <= b.floor) {
            ++below;
            return;
        }
        ++checked;
        const double d = std::abs(fij - fji);
        imbalance += d;
        if (std::min(fij, fji) == 0)
            ++one_way;
        const double v = d / larger;
        if (v > worst) {
            worst = v;
            const bool forward = fij >= fji;
            from = static_cast<std::uint64_t>(forward ? i : j);
            to = static_cast<std::uint64_t>(forward ? j : i);
            worst_flow = larger;
        }
    };
    for (PetscInt i = begin; i < end; ++i) {
        read_row(f, i, out_row);
        read_row(g, i, in_row);
        auto p = std::lower_bound(out_row.begin(), out_row.end(), std::make_pair(i + 1, -1.0));
        auto q = std::lower_bound(in_row.begin(), in_row.end(), std::make_pair(i + 1, -1.0));
        while (p != out_row.end() || q != in_row.end()) {
            if (q == in_row.end() || (p != out_row.end() && p->first < q->first)) {
                judge(i, p->first, p->second, 0);
                ++p;
            } else if (p == out_row.end() || q->first < p->first) {
                judge(i, q->first, 0, q->second);
                ++q;
            } else {
                judge(i, p->first, p->second, q->second);
                ++p;
                ++q;
            }
        }
    }

    double all_imbalance = 0;
    MPI_Allreduce(&imbalance, &all_imbalance, 1, MPI_DOUBLE, MPI_SUM, comm);
    std::uint64_t counts[3] = {checked, below, one_way}, all_counts[3] = {0, 0, 0};
    MPI_Allreduce(counts, all_counts, 3, MPI_UINT64_T, MPI_SUM, comm);
    b.pairs_checked = all_counts[0];
    b.pairs_below_floor = all_counts[1];
    b.one_way_pairs = all_counts[2];
    b.total_relative_imbalance = b.total_flow > 0 ? all_imbalance / b.total_flow : 0;

    // The worst pair: largest violation, then the lowest pair in scan order, which
    // is the rank with the lowest rows among those that hold it.
    double global_worst = -1;
    MPI_Allreduce(&worst, &global_worst, 1, MPI_DOUBLE, MPI_MAX, comm);
    int rank = 0;
    MPI_Comm_rank(comm, &rank);
    int mine = worst == global_worst && checked > 0 ? rank : std::numeric_limits<int>::max();
    int owner = 0;
    MPI_Allreduce(&mine, &owner, 1, MPI_INT, MPI_MIN, comm);
    if (b.pairs_checked > 0) {
        std::uint64_t pair[2] = {from, to};
        MPI_Bcast(pair, 2, MPI_UINT64_T, owner, comm);
        MPI_Bcast(&worst_flow, 1, MPI_DOUBLE, owner, comm);
        b.max_relative_violation = global_worst;
        b.from = pair[0];
        b.to = pair[1];
        b.worst_pair_flow = b.total_flow > 0 ? worst_flow / b.total_flow : 0;
    }
    return b;
}

double reversibility_tolerance(double certified_residual) {
    // A non-reversible chain breaks detailed balance at some pair by a sizeable
    // fraction of its flow (exactly 1 for a transition that has no reverse), while
    // rounding and solver error in a certified vector move the flows of the pairs
    // we judge by roughly the residual relative to the large ones. 1e3 * residual
    // leaves room for the error to concentrate on a few pairs; 1e-6 keeps very
    // tight certificates from turning 1e-10 effects into "not reversible".
    return std::max(1e-6, 1e3 * certified_residual);
}

bool is_reversible(const DetailedBalance& b, double certified_residual) {
    return b.max_relative_violation <= reversibility_tolerance(certified_residual);
}

std::string reversibility_verdict(const DetailedBalance& b, double certified_residual) {
    if (b.pairs_checked == 0)
        return "detailed balance holds trivially: no pair of states exchanges flow";
    if (is_reversible(b, certified_residual))
        return fmt::format("detailed balance holds (max relative violation {:.1e} over {} pairs, "
                           "tolerance {:.0e}): the chain is reversible, so a product-form or "
                           "cut-equation shortcut may exist",
                           b.max_relative_violation, b.pairs_checked,
                           reversibility_tolerance(certified_residual));
    std::string where = fmt::format("between states {} and {}", b.from, b.to);
    if (b.max_relative_violation == 1)
        where += fmt::format(" (flow {} -> {} has no flow back)", b.from, b.to);
    return fmt::format("not reversible (max relative violation {:.2g} {}; {} of {} pairs flow one "
                       "way only; total imbalance {:.2g} of the flow)",
                       b.max_relative_violation, where, b.one_way_pairs, b.pairs_checked,
                       b.total_relative_imbalance);
}

} // namespace longrun::summary

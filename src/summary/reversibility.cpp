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

DetailedBalance check_detailed_balance(const solve::TransposedChain& a, Vec pi) {
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

    // First pass: the total flow and the net-flow residual R from these very
    // flows, so that the slack and the imbalances share their rounding.
    std::vector<std::pair<PetscInt, double>> out_row, in_row;
    double sums[2] = {0, 0}; // total flow, R
    for (PetscInt i = begin; i < end; ++i) {
        read_row(f, i, out_row);
        read_row(g, i, in_row);
        double out = 0, in = 0;
        for (const auto& [j, x] : out_row)
            out += j != i ? x : 0;
        for (const auto& [j, x] : in_row)
            in += j != i ? x : 0;
        sums[0] += out;
        sums[1] += std::abs(out - in);
    }
    double all_sums[2] = {0, 0};
    MPI_Allreduce(sums, all_sums, 2, MPI_DOUBLE, MPI_SUM, comm);
    DetailedBalance b;
    b.total_flow = all_sums[0];
    const double slack = all_sums[1];
    b.net_flow_residual = b.total_flow > 0 ? slack / b.total_flow : 0;

    // Each unordered pair {i, j} is judged once, in row min(i, j).
    double worst = -1, imbalance = 0;
    std::uint64_t from = 0, to = 0;
    double worst_flow = 0;
    bool worst_one_way = false;
    std::uint64_t checked = 0, within = 0, one_way = 0;
    auto judge = [&](PetscInt i, PetscInt j, double fij, double fji) {
        const double larger = std::max(fij, fji);
        if (!(larger > 0))
            return; // a stored zero weight, or no mass at either end
        const double d = std::abs(fij - fji);
        imbalance += d;
        if (larger <= slack) {
            ++within;
            return;
        }
        ++checked;
        if (std::min(fij, fji) == 0)
            ++one_way;
        const double v = std::max(0.0, d - slack) / larger;
        if (v > worst) {
            worst = v;
            const bool forward = fij >= fji;
            from = static_cast<std::uint64_t>(forward ? i : j);
            to = static_cast<std::uint64_t>(forward ? j : i);
            worst_flow = larger;
            worst_one_way = std::min(fij, fji) == 0;
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
    std::uint64_t counts[3] = {checked, within, one_way}, all_counts[3] = {0, 0, 0};
    MPI_Allreduce(counts, all_counts, 3, MPI_UINT64_T, MPI_SUM, comm);
    b.pairs_checked = all_counts[0];
    b.pairs_within_residual = all_counts[1];
    b.one_way_pairs = all_counts[2];
    b.total_relative_imbalance = b.total_flow > 0 ? all_imbalance / b.total_flow : 0;

    // The worst pair: largest violation, then the lowest pair in scan order, which
    // is on the lowest rank among those that hold the largest violation.
    double global_worst = -1;
    MPI_Allreduce(&worst, &global_worst, 1, MPI_DOUBLE, MPI_MAX, comm);
    int rank = 0;
    MPI_Comm_rank(comm, &rank);
    int mine = worst == global_worst && checked > 0 ? rank : std::numeric_limits<int>::max();
    int owner = 0;
    MPI_Allreduce(&mine, &owner, 1, MPI_INT, MPI_MIN, comm);
    if (b.pairs_checked > 0) {
        std::uint64_t pair[3] = {from, to, worst_one_way ? 1u : 0u};
        MPI_Bcast(pair, 3, MPI_UINT64_T, owner, comm);
        MPI_Bcast(&worst_flow, 1, MPI_DOUBLE, owner, comm);
        b.max_relative_violation = global_worst;
        b.from = pair[0];
        b.to = pair[1];
        b.worst_one_way = pair[2] != 0;
        b.worst_pair_flow = b.total_flow > 0 ? worst_flow / b.total_flow : 0;
    }
    return b;
}

double reversibility_tolerance(double certified_residual) {
    // The violation already discounts the vector's own residual R, which covers
    // every pair of a tree-shaped chain. What R cannot see is error circulating
    // round cycles; that is of the order of the residual relative to the flows, so
    // 1e3 * residual leaves it room, and 1e-6 keeps rounding (1e-16 relative) far
    // below the line. A chain that is not reversible breaks detailed balance by a
    // sizeable fraction of some pair's flow (all of it where a transition has no
    // reverse), far above either. Measured here with the slack: exactly 0 on
    // birth-death chains, weighted grids and graph walks solved to residuals from
    // 1e-17 to 1e-8; 1 on the tandem line.
    return std::max(1e-6, 1e3 * certified_residual);
}

bool is_reversible(const DetailedBalance& b, double certified_residual) {
    return b.max_relative_violation <= reversibility_tolerance(certified_residual);
}

std::string reversibility_verdict(const DetailedBalance& b, double certified_residual) {
    if (b.total_flow == 0)
        return "detailed balance holds trivially: no two states exchange flow";
    if (b.pairs_checked == 0)
        return fmt::format("detailed balance cannot be judged: every pair's flow is within the "
                           "vector's own net-flow residual ({:.1e} of the total flow)",
                           b.net_flow_residual);
    const std::string unjudged =
        b.pairs_within_residual == 0
            ? ""
            : fmt::format("; {} pair{} with flows within the residual not judged",
                          b.pairs_within_residual, b.pairs_within_residual == 1 ? "" : "s");
    if (is_reversible(b, certified_residual))
        return fmt::format("detailed balance holds (max relative violation {:.1e} over {} "
                           "pair{}{}): the chain is reversible, so a product-form or "
                           "cut-equation shortcut may exist",
                           b.max_relative_violation, b.pairs_checked,
                           b.pairs_checked == 1 ? "" : "s", unjudged);
    return fmt::format("not reversible (max relative violation {:.2g} between states {} and {}{}; "
                       "{} of {} pairs flow one way only; imbalance {:.2g} of the total flow)",
                       b.max_relative_violation, b.from, b.to,
                       b.worst_one_way ? fmt::format(", no flow from {} back to {}", b.to, b.from)
                                       : "",
                       b.one_way_pairs, b.pairs_checked, b.total_relative_imbalance);
}

} // namespace longrun::summary

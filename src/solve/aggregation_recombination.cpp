#include "aggregation_recombination.hpp"

#include <algorithm>
#include <cmath>

namespace longrun::solve {

IterantRecombination::IterantRecombination(Vec like, int window)
    : window_(std::max(1, window)), x_(static_cast<std::size_t>(window_)),
      r_(static_cast<std::size_t>(window_)),
      gram_(static_cast<std::size_t>(window_ * window_), 0.0) {
    for (int k = 0; k < window_; ++k) {
        check(VecDuplicate(like, x_[k].out()), "VecDuplicate");
        check(VecDuplicate(like, r_[k].out()), "VecDuplicate");
    }
}

void IterantRecombination::push(Vec x, Vec r) {
    newest_ = (newest_ + 1) % window_;
    count_ = std::min(count_ + 1, window_);
    check(VecCopy(x, x_[newest_]), "VecCopy");
    check(VecCopy(r, r_[newest_]), "VecCopy");
    // Only the new row of the Gram matrix changes: one multi-dot.
    std::vector<Vec> all(static_cast<std::size_t>(window_));
    for (int k = 0; k < window_; ++k)
        all[k] = r_[k];
    std::vector<PetscScalar> dots(static_cast<std::size_t>(window_), 0.0);
    const int known = count_;
    // Slots 0..count_-1 are filled once the window has wrapped or while it fills.
    check(VecMDot(r_[newest_], known, all.data(), dots.data()), "VecMDot");
    for (int k = 0; k < known; ++k) {
        gram_[newest_ * window_ + k] = dots[k];
        gram_[k * window_ + newest_] = dots[k];
    }
}

IterantRecombination::Outcome IterantRecombination::combine(Vec out, Vec r_out) {
    const int m = count_;
    lifted_mass_ = 0;
    if (m < 2)
        return Outcome::none;
    // Minimise c^T G c subject to sum(c) = 1: c = G^{-1} 1 / (1^T G^{-1} 1). A
    // small ridge keeps nearly parallel residuals (near convergence) solvable.
    std::vector<double> g(static_cast<std::size_t>(m * m)), c(static_cast<std::size_t>(m), 1.0);
    double largest = 0;
    for (int i = 0; i < m; ++i)
        largest = std::max(largest, gram_[i * window_ + i]);
    if (!(largest > 0) || !std::isfinite(largest))
        return Outcome::none;
    for (int i = 0; i < m; ++i)
        for (int j = 0; j < m; ++j)
            g[i * m + j] = gram_[i * window_ + j] / largest + (i == j ? 1e-12 : 0.0);
    // Gaussian elimination with partial pivoting; m is a handful.
    for (int col = 0; col < m; ++col) {
        int pivot = col;
        for (int i = col + 1; i < m; ++i)
            if (std::abs(g[i * m + col]) > std::abs(g[pivot * m + col]))
                pivot = i;
        if (!(std::abs(g[pivot * m + col]) > 0))
            return Outcome::none;
        if (pivot != col) {
            for (int j = 0; j < m; ++j)
                std::swap(g[col * m + j], g[pivot * m + j]);
            std::swap(c[col], c[pivot]);
        }
        for (int i = col + 1; i < m; ++i) {
            const double f = g[i * m + col] / g[col * m + col];
            for (int j = col; j < m; ++j)
                g[i * m + j] -= f * g[col * m + j];
            c[i] -= f * c[col];
        }
    }
    for (int i = m - 1; i >= 0; --i) {
        for (int j = i + 1; j < m; ++j)
            c[i] -= g[i * m + j] * c[j];
        c[i] /= g[i * m + i];
    }
    double total = 0;
    for (double v : c)
        total += v;
    if (!(std::abs(total) > 0) || !std::isfinite(total))
        return Outcome::none;
    for (double& v : c)
        v /= total;

    std::vector<Vec> xs(static_cast<std::size_t>(m)), rs(static_cast<std::size_t>(m));
    for (int k = 0; k < m; ++k) {
        xs[k] = x_[k];
        rs[k] = r_[k];
    }
    check(VecSet(out, 0.0), "VecSet");
    check(VecMAXPY(out, m, c.data(), xs.data()), "VecMAXPY");
    check(VecSet(r_out, 0.0), "VecSet");
    check(VecMAXPY(r_out, m, c.data(), rs.data()), "VecMAXPY");
    PetscInt n = 0;
    check(VecGetLocalSize(out, &n), "VecGetLocalSize");
    PetscScalar* y = nullptr;
    const PetscScalar* newest = nullptr;
    check(VecGetArray(out, &y), "VecGetArray");
    check(VecGetArrayRead(x_[newest_], &newest), "VecGetArrayRead");
    double lifted = 0;
    for (PetscInt i = 0; i < n; ++i)
        if (!(y[i] > 0)) {
            lifted += std::abs(newest[i] - y[i]);
            y[i] = newest[i];
        }
    check(VecRestoreArrayRead(x_[newest_], &newest), "VecRestoreArrayRead");
    check(VecRestoreArray(out, &y), "VecRestoreArray");
    MPI_Allreduce(&lifted, &lifted_mass_, 1, MPI_DOUBLE, MPI_SUM,
                  PetscObjectComm((PetscObject)out));
    return lifted_mass_ > 0 ? Outcome::lifted : Outcome::combined;
}

} // namespace longrun::solve

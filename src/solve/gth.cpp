#include "gth.hpp"

#include "io/error.hpp"

#include <algorithm>
#include <string>

namespace longrun::solve {

std::vector<double> gth_stationary(const LocalRows& in) {
    const std::size_t n = in.states;
    std::vector<double> a(n * n, 0.0);
    auto at = [&](std::size_t i, std::size_t j) -> double& { return a[i * n + j]; };
    for (std::size_t i = 0; i < n; ++i)
        for (auto k = in.offsets[i]; k < in.offsets[i + 1]; ++k)
            if (in.targets[k] != i) // self-loops do not move mass between states
                at(i, in.targets[k]) += in.weights[k];
    // Envelopes: row r has no nonzero left of row_first[r], column c none above
    // col_first[c]. Elimination only fills inside them, so the loops below skip
    // entries that are exactly zero and the result is bit for bit the dense one;
    // a banded chain (a grid numbered row by row) costs O(n b^2) instead of O(n^3).
    std::vector<std::size_t> row_first(n), col_first(n);
    for (std::size_t i = 0; i < n; ++i)
        row_first[i] = col_first[i] = i;
    for (std::size_t i = 0; i < n; ++i)
        for (std::size_t j = 0; j < n; ++j)
            if (at(i, j) != 0) {
                row_first[i] = std::min(row_first[i], j);
                col_first[j] = std::min(col_first[j], i);
            }
    for (std::size_t k = n - 1; k >= 1; --k) {
        double s = 0;
        for (std::size_t j = row_first[k]; j < k; ++j)
            s += at(k, j);
        if (!(s > 0))
            throw NumericalError("GTH: state " + std::to_string(k) +
                                 " has no transition to a lower-numbered state after "
                                 "elimination: the chain is not irreducible");
        for (std::size_t i = col_first[k]; i < k; ++i)
            at(i, k) /= s;
        for (std::size_t i = col_first[k]; i < k; ++i) {
            const double f = at(i, k);
            if (f == 0)
                continue;
            for (std::size_t j = row_first[k]; j < k; ++j)
                at(i, j) += f * at(k, j);
            row_first[i] = std::min(row_first[i], row_first[k]);
        }
        for (std::size_t j = row_first[k]; j < k; ++j)
            col_first[j] = std::min(col_first[j], col_first[k]);
    }
    std::vector<double> pi(n, 0.0);
    pi[0] = 1;
    double total = 1;
    for (std::size_t k = 1; k < n; ++k) {
        double v = 0;
        for (std::size_t i = col_first[k]; i < k; ++i)
            v += pi[i] * at(i, k);
        pi[k] = v;
        total += v;
        // pi[0] = 1 is only a scale: when state 0 is improbable the others can
        // exceed the double range (a coarse chain whose aggregates span 10^-300
        // and 1). Rescaling what is done so far keeps every ratio.
        if (total > 1e250) {
            const double scale = total;
            total = 0;
            for (std::size_t i = 0; i <= k; ++i) {
                pi[i] /= scale;
                total += pi[i];
            }
        }
    }
    for (auto& v : pi)
        v /= total;
    return pi;
}

} // namespace longrun::solve

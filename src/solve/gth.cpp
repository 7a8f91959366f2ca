#include "gth.hpp"

#include "io/error.hpp"

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
    for (std::size_t k = n - 1; k >= 1; --k) {
        double s = 0;
        for (std::size_t j = 0; j < k; ++j)
            s += at(k, j);
        if (!(s > 0))
            throw NumericalError("GTH: state " + std::to_string(k) +
                                 " has no transition to a lower-numbered state after "
                                 "elimination: the chain is not irreducible");
        for (std::size_t i = 0; i < k; ++i)
            at(i, k) /= s;
        for (std::size_t i = 0; i < k; ++i) {
            const double f = at(i, k);
            if (f == 0)
                continue;
            for (std::size_t j = 0; j < k; ++j)
                at(i, j) += f * at(k, j);
        }
    }
    std::vector<double> pi(n, 0.0);
    pi[0] = 1;
    double total = 1;
    for (std::size_t k = 1; k < n; ++k) {
        double v = 0;
        for (std::size_t i = 0; i < k; ++i)
            v += pi[i] * at(i, k);
        pi[k] = v;
        total += v;
    }
    for (auto& v : pi)
        v /= total;
    return pi;
}

} // namespace longrun::solve

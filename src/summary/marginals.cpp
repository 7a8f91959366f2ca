#include "marginals.hpp"

#include "io/mpi_gather.hpp"

#include <algorithm>
#include <cmath>
#include <map>

namespace longrun::summary {

namespace {

// Merges (value, mass) pairs from all ranks on every rank. The number of
// distinct values of a state variable is small in practice (a queue length, a
// phase); each rank first reduces its own states to those.
std::map<double, double> gather_masses(MPI_Comm comm, const std::map<double, double>& local) {
    std::vector<double> flat;
    flat.reserve(2 * local.size());
    for (const auto& [v, p] : local) {
        flat.push_back(v);
        flat.push_back(p);
    }
    const std::vector<double> all = gather_to_all<double>(comm, flat);
    std::map<double, double> merged;
    for (std::size_t i = 0; i + 1 < all.size(); i += 2)
        merged[all[i]] += all[i + 1];
    return merged;
}

} // namespace

Marginal marginal(MPI_Comm comm, const std::string& name, bool integral,
                  std::span<const double> values, std::span<const double> pi) {
    std::map<double, double> local;
    for (std::size_t i = 0; i < values.size(); ++i)
        local[values[i]] += pi[i];
    const auto merged = gather_masses(comm, local);
    Marginal m;
    m.name = name;
    m.integral = integral;
    for (const auto& [v, p] : merged) {
        m.values.push_back(v);
        m.pmf.push_back(p);
    }
    // Tail sums from the top so that tiny tail masses keep their relative accuracy.
    m.tail.assign(m.values.size(), 0.0);
    double running = 0;
    for (std::size_t i = m.values.size(); i-- > 0;) {
        running += m.pmf[i];
        m.tail[i] = running;
    }
    double mean = 0;
    for (std::size_t i = 0; i < m.values.size(); ++i)
        mean += m.values[i] * m.pmf[i];
    double var = 0;
    for (std::size_t i = 0; i < m.values.size(); ++i)
        var += (m.values[i] - mean) * (m.values[i] - mean) * m.pmf[i];
    m.mean = mean;
    m.std = std::sqrt(std::max(var, 0.0));
    m.q50 = quantile(m, 0.50);
    m.q90 = quantile(m, 0.90);
    m.q99 = quantile(m, 0.99);
    m.q999 = quantile(m, 0.999);
    return m;
}

double quantile(const Marginal& m, double p) {
    // P(X <= v_i) = 1 - tail[i+1]; compare on the tail side to avoid 1 - tiny.
    for (std::size_t i = 0; i < m.values.size(); ++i) {
        const double above = i + 1 < m.values.size() ? m.tail[i + 1] : 0.0;
        if (above <= 1.0 - p + 1e-15)
            return m.values[i];
    }
    return m.values.empty() ? 0.0 : m.values.back();
}

double tail_at(const Marginal& m, double threshold) {
    const auto it = std::lower_bound(m.values.begin(), m.values.end(), threshold);
    if (it == m.values.end())
        return 0.0;
    return m.tail[static_cast<std::size_t>(it - m.values.begin())];
}

std::vector<std::pair<double, double>> informative_tail(const Marginal& m) {
    std::vector<std::pair<double, double>> out;
    for (double level : {1e-1, 1e-2, 1e-3, 1e-6, 1e-9}) {
        for (std::size_t i = 0; i < m.values.size(); ++i) {
            if (m.tail[i] <= level) {
                if (out.empty() || out.back().first != m.values[i])
                    out.emplace_back(m.values[i], m.tail[i]);
                break;
            }
        }
    }
    return out;
}

} // namespace longrun::summary

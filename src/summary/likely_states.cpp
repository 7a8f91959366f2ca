#include "likely_states.hpp"

#include "io/mpi_gather.hpp"

#include <algorithm>
#include <cmath>
#include <numeric>

namespace longrun::summary {

namespace {

// Most likely first; equal probabilities by lower state index, so that the list
// is the same whatever the partition.
bool before(double p_a, std::uint64_t a, double p_b, std::uint64_t b) {
    return p_a != p_b ? p_a > p_b : a < b;
}

} // namespace

std::vector<io::LikelyStateRecord> likely_states(MPI_Comm comm, const io::Chain& chain,
                                                 std::span<const double> pi, std::size_t k) {
    const std::size_t rows = std::min<std::size_t>(chain.local_rows(), pi.size());
    std::vector<std::size_t> order(rows);
    std::iota(order.begin(), order.end(), std::size_t{0});
    // A NaN entry cannot be ordered; it is no likely state either.
    std::erase_if(order, [&](std::size_t i) { return std::isnan(pi[i]); });
    const std::size_t mine = std::min(k, order.size());
    std::partial_sort(order.begin(), order.begin() + static_cast<std::ptrdiff_t>(mine), order.end(),
                      [&](std::size_t a, std::size_t b) { return before(pi[a], a, pi[b], b); });

    // Each candidate travels with its variable values: [index, probability, values...].
    const std::size_t width = 2 + chain.variables.size();
    std::vector<double> flat;
    flat.reserve(mine * width);
    for (std::size_t j = 0; j < mine; ++j) {
        const std::size_t i = order[j];
        flat.push_back(static_cast<double>(chain.rows.begin + i)); // exact below 2^53 states
        flat.push_back(pi[i]);
        for (const auto& v : chain.variables)
            flat.push_back(i < v.values.size() ? v.values[i] : NAN);
    }
    const std::vector<double> all = gather_to_all<double>(comm, flat);

    std::vector<std::size_t> candidates(all.size() / width);
    std::iota(candidates.begin(), candidates.end(), std::size_t{0});
    const auto index = [&](std::size_t c) { return static_cast<std::uint64_t>(all[c * width]); };
    const auto probability = [&](std::size_t c) { return all[c * width + 1]; };
    const std::size_t chosen = std::min(k, candidates.size());
    std::partial_sort(candidates.begin(), candidates.begin() + static_cast<std::ptrdiff_t>(chosen),
                      candidates.end(), [&](std::size_t a, std::size_t b) {
                          return before(probability(a), index(a), probability(b), index(b));
                      });

    std::vector<io::LikelyStateRecord> out;
    for (std::size_t j = 0; j < chosen; ++j) {
        const std::size_t c = candidates[j];
        io::LikelyStateRecord r;
        r.index = index(c);
        r.probability = probability(c);
        for (std::size_t v = 0; v < chain.variables.size(); ++v)
            r.variables.emplace_back(chain.variables[v].name, all[c * width + 2 + v]);
        out.push_back(std::move(r));
    }
    return out;
}

} // namespace longrun::summary

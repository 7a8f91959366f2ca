#include "chain.hpp"

#include <algorithm>
#include <numeric>

namespace longrun::io {

std::string to_string(ChainKind kind) {
    return kind == ChainKind::ctmc ? "ctmc" : "dtmc";
}

std::optional<ChainKind> parse_kind(const std::string& text) {
    if (text == "ctmc")
        return ChainKind::ctmc;
    if (text == "dtmc")
        return ChainKind::dtmc;
    return std::nullopt;
}

Chain chain_from_triples(ChainKind kind, std::uint64_t states, std::vector<std::uint64_t> sources,
                         std::vector<std::uint64_t> targets, std::vector<double> weights) {
    Chain c;
    c.kind = kind;
    c.states = states;
    c.transitions = sources.size();
    c.rows = {0, states};
    // Counting sort by source row, then sort each row by target: O(nnz log deg).
    c.offsets.assign(states + 1, 0);
    for (auto s : sources)
        ++c.offsets[s + 1];
    std::partial_sum(c.offsets.begin(), c.offsets.end(), c.offsets.begin());
    std::vector<std::uint64_t> next(c.offsets.begin(), c.offsets.end() - 1);
    c.targets.resize(sources.size());
    c.weights.resize(sources.size());
    for (std::size_t k = 0; k < sources.size(); ++k) {
        const auto at = next[sources[k]]++;
        c.targets[at] = targets[k];
        c.weights[at] = weights[k];
    }
    std::vector<std::pair<std::uint64_t, double>> row;
    for (std::uint64_t r = 0; r < states; ++r) {
        row.clear();
        for (auto k = c.offsets[r]; k < c.offsets[r + 1]; ++k)
            row.emplace_back(c.targets[k], c.weights[k]);
        std::sort(row.begin(), row.end(),
                  [](const auto& a, const auto& b) { return a.first < b.first; });
        for (std::size_t i = 0; i < row.size(); ++i) {
            c.targets[c.offsets[r] + i] = row[i].first;
            c.weights[c.offsets[r] + i] = row[i].second;
        }
    }
    return c;
}

} // namespace longrun::io

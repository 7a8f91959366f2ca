#include "sampler.hpp"

#include <stdexcept>

namespace longrun::simulate {

Sampler::Sampler(const io::Chain& chain) : states_(chain.states), entries_(chain.targets.size()) {
    if (chain.rows.begin != 0 || chain.rows.size() != chain.states ||
        chain.offsets.size() != chain.states + 1 || chain.offsets.back() != chain.targets.size() ||
        chain.weights.size() != chain.targets.size())
        throw std::invalid_argument("simulation needs the whole chain in memory (every row)");
    if (!chain.events.empty()) {
        if (chain.events.size() != chain.targets.size())
            throw std::invalid_argument(
                "simulation: the chain has " + std::to_string(chain.events.size()) +
                " transition labels for " + std::to_string(chain.targets.size()) + " transitions");
        labels_.assign(chain.events.begin(), chain.events.end());
    }
    const bool ctmc = chain.kind == io::ChainKind::ctmc;
    for (std::uint64_t s = 0; s < chain.states; ++s) {
        StateRecord& row = states_[s];
        row.first = chain.offsets[s];
        const std::uint64_t count = chain.offsets[s + 1] - chain.offsets[s];
        row.count = static_cast<std::uint32_t>(count);
        if (row.count != count)
            throw std::invalid_argument("simulation: a row has 2^32 transitions or more");
        double running = 0;
        for (auto k = chain.offsets[s]; k < chain.offsets[s + 1]; ++k) {
            if (chain.targets[k] >= chain.states)
                throw std::invalid_argument("simulation: a transition leads outside the chain");
            if (chain.targets[k] != s && chain.weights[k] > 0)
                row.absorbing = 0;
            running += chain.weights[k];
            entries_[k] = {running, chain.targets[k]};
        }
        if (ctmc && running > 0) {
            row.mean_holding = 1 / running;
            // x / x is exactly 1, so the last cumulative weight is 1 and a draw
            // below 1 always finds a transition.
            for (auto k = chain.offsets[s]; k < chain.offsets[s + 1]; ++k)
                entries_[k].cumulative /= running;
        }
    }
}

} // namespace longrun::simulate

// Next-state sampling on a whole chain held in memory (rows = [0, states)).
#pragma once

#include "io/chain.hpp"

#include <cstdint>
#include <limits>
#include <vector>

namespace longrun::simulate {

// Per row the cumulative weights of its transitions: inverse-transform
// sampling, the first transition whose cumulative weight exceeds a uniform draw
// (linear scan on short rows, binary search on long ones). Walker's alias
// method (Walker 1977, with Vose's construction, 1991) was measured against it
// on the same paths (benchmarks/RESULTS.md): about 10 % faster per draw on a tandem
// line's three-entry rows, but 1.2-1.9x slower on random rows, where a step is
// bound by memory latency and the alias slots take twice the memory. What one
// step reads is packed: a state's record (where its row starts, its length,
// mean holding time, absorption) and the row's (cumulative weight, target)
// pairs, which for short rows share one cache line.
//
// ctmc: a row's rates, divided by their total, are the jump probabilities;
// the holding time is Exp(total). A rate from a state to itself is kept: it
// leaves the path's law unchanged (exponential holding times have no memory)
// and lets a labelled self-loop (an arrival lost at a full queue) be counted
// when it fires.
// dtmc: weights are probabilities and are not rescaled; a draw beyond the
// row's sum means "stay" (unlabelled): a diagonal entry need not be stored, and
// validated files sum to 1 only up to rounding.
class Sampler {
  public:
    static constexpr std::uint32_t no_label = 1u << 16; // above every u16 label

    struct Move {
        std::uint64_t target;
        std::uint32_t label; // the transition's label, or no_label
    };

    explicit Sampler(const io::Chain& chain);

    // The move from `state` for a uniform draw u in [0, 1).
    Move pick(std::uint64_t state, double u) const noexcept {
        const StateRecord& row = states_[state];
        const std::uint64_t first = row.first, last = row.first + row.count;
        std::uint64_t k = first;
        if (row.count <= linear_scan_limit) {
            while (k < last && !(u < entries_[k].cumulative))
                ++k;
        } else {
            std::uint64_t hi = last; // first k with u < cumulative[k]
            while (k < hi) {
                const std::uint64_t mid = k + (hi - k) / 2;
                if (u < entries_[mid].cumulative)
                    hi = mid;
                else
                    k = mid + 1;
            }
        }
        if (k == last)
            return {state, no_label};
        return {entries_[k].target, labels_.empty() ? no_label : labels_[k]};
    }

    // ctmc: the inverse of the total rate out of the state (self-loops included),
    // infinity for a state with none.
    double mean_holding(std::uint64_t state) const noexcept { return states_[state].mean_holding; }
    double total_rate(std::uint64_t state) const noexcept {
        return 1 / states_[state].mean_holding;
    }

    // No transition to another state has positive weight: once here, the path
    // stays for ever.
    bool absorbing(std::uint64_t state) const noexcept { return states_[state].absorbing != 0; }

    std::uint64_t states() const noexcept { return states_.size(); }

  private:
    static constexpr std::uint32_t linear_scan_limit = 8;
    struct StateRecord {
        std::uint64_t first = 0;
        std::uint32_t count = 0;
        std::uint32_t absorbing = 1;
        double mean_holding = std::numeric_limits<double>::infinity();
    };
    struct Entry {
        double cumulative;
        std::uint64_t target;
    };
    std::vector<StateRecord> states_;
    std::vector<Entry> entries_;
    std::vector<std::uint32_t> labels_; // per transition, when the chain has labels
};

} // namespace longrun::simulate

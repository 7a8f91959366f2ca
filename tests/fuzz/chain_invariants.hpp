// What a chain accepted by io::validate_slice promises everything downstream:
// the solvers index with its targets, rely on dtmc rows summing to 1 and on
// finite ctmc exit rates, and the summaries look up event names. A broken
// promise is as much a bug as a crash, so it stops the fuzzer like one.
#pragma once

#include "io/chain.hpp"

#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <limits>

namespace longrun::fuzz {

[[noreturn]] inline void broken(const char* what, std::uint64_t row) {
    std::fprintf(stderr, "accepted chain breaks its promise: %s (row %llu)\n", what,
                 static_cast<unsigned long long>(row));
    std::abort();
}

inline void check_accepted(const io::Chain& c) {
    if (c.offsets.size() != c.local_rows() + 1 || c.offsets.front() != 0 ||
        c.offsets.back() != c.targets.size() || c.weights.size() != c.targets.size() ||
        (!c.events.empty() && c.events.size() != c.targets.size()))
        broken("CSR arrays of inconsistent sizes", c.rows.begin);
    const bool ctmc = c.kind == io::ChainKind::ctmc;
    for (std::uint64_t i = 0; i < c.local_rows(); ++i) {
        const std::uint64_t row = c.rows.begin + i;
        const auto begin = c.offsets[i], end = c.offsets[i + 1];
        double sum = 0;
        for (auto k = begin; k < end; ++k) {
            if (c.targets[k] >= c.states)
                broken("target out of range", row);
            if (k > begin && c.targets[k] <= c.targets[k - 1])
                broken("targets not strictly increasing", row);
            if (!std::isfinite(c.weights[k]) || c.weights[k] < 0)
                broken("weight not finite or negative", row);
            if (!c.events.empty() && c.events[k] >= c.event_names.size())
                broken("event without a name", row);
            if (!(ctmc && c.targets[k] == row))
                sum += c.weights[k];
        }
        if (ctmc && !std::isfinite(sum))
            broken("ctmc total rate not finite", row);
        // Rows are rescaled unless already 1 up to the rounding of their own sum.
        const double slack =
            8 * std::numeric_limits<double>::epsilon() * static_cast<double>(end - begin + 1);
        if (!ctmc && !(std::abs(sum - 1) <= slack))
            broken("dtmc row does not sum to 1", row);
    }
    for (const auto& v : c.variables)
        for (std::uint64_t i = 0; i < v.values.size(); ++i)
            if (!std::isfinite(v.values[i]))
                broken("state variable not finite", c.rows.begin + i);
}

} // namespace longrun::fuzz

// The part of a chain a partitioner looks at: this rank's rows in CSR with global
// target indices. A view, so that partition/ needs neither io/ nor src/.
#pragma once

#include "row_range.hpp"

#include <cstdint>
#include <span>

namespace longrun::partition {

struct CsrView {
    std::uint64_t states = 0;
    RowRange rows;
    std::span<const std::uint64_t> offsets; // rows.size() + 1, starting at 0
    std::span<const std::uint64_t> targets; // global indices, self-loops allowed
};

} // namespace longrun::partition

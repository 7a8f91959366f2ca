// What the numerical core sees of a chain: this rank's rows in plain CSR and the
// ownership range. No files, no HDF5 (DESIGN.md's layer rule).
#pragma once

#include "partition/row_range.hpp"

#include <cstdint>
#include <span>

namespace longrun::solve {

enum class TimeModel { continuous, discrete }; // ctmc rates or dtmc probabilities

struct LocalRows {
    TimeModel time = TimeModel::continuous;
    std::uint64_t states = 0;
    RowRange rows;
    std::span<const std::uint64_t> offsets; // rows.size() + 1, starting at 0
    std::span<const std::uint64_t> targets; // global state indices
    std::span<const double> weights;
};

} // namespace longrun::solve

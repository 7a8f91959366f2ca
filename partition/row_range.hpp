// A contiguous range of rows [begin, end) owned by one rank. Row ownership is
// always contiguous: it is what PETSc's MPIAIJ layout and HDF5 hyperslabs want.
#pragma once

#include <cstdint>

namespace longrun {

struct RowRange {
    std::uint64_t begin = 0;
    std::uint64_t end = 0;

    std::uint64_t size() const noexcept { return end - begin; }
    bool empty() const noexcept { return end == begin; }
    bool contains(std::uint64_t row) const noexcept { return row >= begin && row < end; }
    friend bool operator==(const RowRange&, const RowRange&) = default;
};

} // namespace longrun

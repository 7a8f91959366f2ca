// Moving rows to the ranks a partition gave them. Each part becomes one
// contiguous block of new indices (part p owns the p-th block), rows keep their
// relative file order inside a part, so the new layout is again a plain
// contiguous ownership range per rank and PETSc's MPIAIJ layout fits it.
#pragma once

#include "csr_view.hpp"

#include <mpi.h>

#include <cstdint>
#include <span>
#include <vector>

namespace longrun::partition {

// A CSR slice that owns its arrays, in the new numbering.
struct MovedRows {
    RowRange rows;
    std::vector<std::uint64_t> offsets{0};
    std::vector<std::uint64_t> targets; // new indices, increasing per row
    std::vector<double> weights;
};

class Redistribution {
  public:
    // Collective. `part` holds the part of each of this rank's rows (file order).
    Redistribution(MPI_Comm comm, RowRange file_rows, std::span<const std::uint64_t> part);

    RowRange file_rows() const noexcept { return file_rows_; }
    RowRange new_rows() const noexcept { return new_rows_; }
    // New index of each of this rank's file rows.
    const std::vector<std::uint64_t>& new_index() const noexcept { return new_index_; }

    // Collective: this rank's CSR (file order, file indices) moved to the new
    // owners and renumbered.
    MovedRows move(const CsrView& csr, std::span<const double> weights) const;

    // Collective: per-row values from file order to the new order, and back.
    template <class T>
    std::vector<T> to_new_order(std::span<const T> file_order) const {
        std::vector<T> out(new_rows_.size());
        exchange(file_order.data(), out.data(), sizeof(T), true);
        return out;
    }
    template <class T>
    std::vector<T> to_file_order(std::span<const T> new_order) const {
        std::vector<T> out(file_rows_.size());
        exchange(new_order.data(), out.data(), sizeof(T), false);
        return out;
    }

  private:
    void exchange(const void* from, void* to, std::size_t bytes, bool forward) const;

    MPI_Comm comm_;
    RowRange file_rows_, new_rows_;
    std::vector<RowRange> file_ranges_;
    std::vector<std::uint64_t> new_index_;
    // Forward: file rows in the order they are sent (grouped by destination), and
    // the new local position of each row received, in receive order.
    std::vector<std::uint64_t> send_order_, receive_position_;
    std::vector<int> send_counts_, send_displs_, receive_counts_, receive_displs_;
};

} // namespace longrun::partition

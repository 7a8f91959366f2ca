// Variable-length gathers: every rank gives a (possibly empty) run of items and
// every rank receives all of them, in rank order.
//
// Items travel as one contiguous MPI datatype of sizeof(T) bytes, so MPI's int
// counts and displacements count items, not bytes: a gather may exceed 2^31
// bytes as long as it stays below 2^31 items. Past that (Open MPI 4 has no
// large-count calls) every rank sees the same counts and throws the same
// InputError, so that no rank is left waiting in a collective call.
#pragma once

#include "error.hpp"

#include <mpi.h>

#include <climits>
#include <cstddef>
#include <cstdint>
#include <span>
#include <string>
#include <type_traits>
#include <vector>

namespace longrun {

// All items, and where each rank's run starts: rank r gave
// items[offsets[r], offsets[r + 1]).
template <class T>
struct GatheredRuns {
    std::vector<T> items;
    std::vector<std::size_t> offsets; // one per rank, plus the end
};

// Collective.
template <class T>
GatheredRuns<T> gather_runs_to_all(MPI_Comm comm, std::span<const T> mine) {
    static_assert(std::is_trivially_copyable_v<T>, "items travel as raw bytes");
    int size = 1;
    MPI_Comm_size(comm, &size);
    const std::uint64_t my_count = mine.size();
    std::vector<std::uint64_t> counts(static_cast<std::size_t>(size));
    MPI_Allgather(&my_count, 1, MPI_UINT64_T, counts.data(), 1, MPI_UINT64_T, comm);

    GatheredRuns<T> out;
    out.offsets.assign(static_cast<std::size_t>(size) + 1, 0);
    for (std::size_t r = 0; r < counts.size(); ++r)
        out.offsets[r + 1] = out.offsets[r] + counts[r];
    const std::uint64_t total = out.offsets.back();
    // The same verdict on every rank: they all hold the same counts.
    if (total > static_cast<std::uint64_t>(INT_MAX)) {
        InputError too_many("gathering " + std::to_string(total) +
                            " items on every rank exceeds what one MPI call can carry (2^31 - 1)");
        too_many.mark_agreed();
        throw too_many;
    }

    std::vector<int> item_counts(counts.size()), displacements(counts.size());
    for (std::size_t r = 0; r < counts.size(); ++r) {
        item_counts[r] = static_cast<int>(counts[r]);
        displacements[r] = static_cast<int>(out.offsets[r]);
    }
    MPI_Datatype item;
    MPI_Type_contiguous(static_cast<int>(sizeof(T)), MPI_BYTE, &item);
    MPI_Type_commit(&item);
    out.items.resize(static_cast<std::size_t>(total));
    // A rank with nothing to give still passes a valid (possibly null) buffer.
    MPI_Allgatherv(mine.data(), static_cast<int>(my_count), item, out.items.data(),
                   item_counts.data(), displacements.data(), item, comm);
    MPI_Type_free(&item);
    return out;
}

// Collective. Every rank's items, concatenated in rank order.
template <class T>
std::vector<T> gather_to_all(MPI_Comm comm, std::span<const T> mine) {
    return gather_runs_to_all(comm, mine).items;
}

} // namespace longrun

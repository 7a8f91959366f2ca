// Splitting a whole in-memory chain into the rows one rank owns, as the chain
// reader would, so that summary tests can use exact stationary vectors without
// writing files (and keep fields the file format may not carry yet).
#pragma once

#include "io/chain.hpp"

#include <mpi.h>

#include <span>
#include <vector>

namespace longrun::testing_support {

// Contiguous blocks of nearly equal size.
inline RowRange even_rows(std::uint64_t states, MPI_Comm comm) {
    int rank = 0, size = 1;
    MPI_Comm_rank(comm, &rank);
    MPI_Comm_size(comm, &size);
    return {states * rank / size, states * (rank + 1) / size};
}

// Rank 0 owns nothing when there are other ranks: every collective must still
// work with zero rows.
inline RowRange rows_without_first_rank(std::uint64_t states, MPI_Comm comm) {
    int rank = 0, size = 1;
    MPI_Comm_rank(comm, &rank);
    MPI_Comm_size(comm, &size);
    if (size == 1)
        return {0, states};
    if (rank == 0)
        return {0, 0};
    const auto others = static_cast<std::uint64_t>(size - 1),
               r = static_cast<std::uint64_t>(rank - 1);
    return {states * r / others, states * (r + 1) / others};
}

template <class T>
std::vector<T> part(const std::vector<T>& whole, RowRange rows) {
    if (whole.empty())
        return {};
    return std::vector<T>(whole.begin() + static_cast<std::ptrdiff_t>(rows.begin),
                          whole.begin() + static_cast<std::ptrdiff_t>(rows.end));
}

inline io::Chain slice(const io::Chain& whole, RowRange rows) {
    io::Chain c = whole;
    c.rows = rows;
    const auto first = whole.offsets[rows.begin], last = whole.offsets[rows.end];
    c.offsets.assign(1, 0);
    for (auto r = rows.begin; r < rows.end; ++r)
        c.offsets.push_back(whole.offsets[r + 1] - first);
    const auto range = [&](const auto& v) {
        using V = std::decay_t<decltype(v)>;
        return v.empty() ? V{} : V(v.begin() + first, v.begin() + last);
    };
    c.targets = range(whole.targets);
    c.weights = range(whole.weights);
    c.events = range(whole.events);
    for (auto& v : c.variables)
        v.values = part(v.values, rows);
    for (auto& m : c.measures)
        m.values = part(m.values, rows);
    for (auto& e : c.event_intensities)
        e.values = part(e.values, rows);
    return c;
}

} // namespace longrun::testing_support

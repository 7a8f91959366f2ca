#include "aggregation_grouping.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <unordered_map>

namespace longrun::solve {

Grouping group_by_coordinates(const AggregationLevel& level, double variable_strength) {
    const std::size_t n_vars = level.coordinates.size();
    std::vector<std::int64_t> lo(n_vars, std::numeric_limits<std::int64_t>::max());
    std::vector<std::int64_t> hi(n_vars, std::numeric_limits<std::int64_t>::min());
    std::vector<double> moves(n_vars, 0.0);
    for (std::size_t v = 0; v < n_vars; ++v) {
        const auto& c = level.coordinates[v];
        for (PetscInt i = 0; i < level.local; ++i) {
            lo[v] = std::min(lo[v], c[i]);
            hi[v] = std::max(hi[v], c[i]);
            for (PetscInt k = level.owned.row_start[i]; k < level.owned.row_start[i + 1]; ++k)
                if (c[level.owned.column[k]] != c[i])
                    moves[v] += std::abs(level.owned.value[k]);
        }
    }
    std::vector<std::int64_t> glo(n_vars), ghi(n_vars);
    std::vector<double> gmoves(n_vars);
    MPI_Allreduce(lo.data(), glo.data(), static_cast<int>(n_vars), MPI_INT64_T, MPI_MIN,
                  level.comm);
    MPI_Allreduce(hi.data(), ghi.data(), static_cast<int>(n_vars), MPI_INT64_T, MPI_MAX,
                  level.comm);
    MPI_Allreduce(moves.data(), gmoves.data(), static_cast<int>(n_vars), MPI_DOUBLE, MPI_SUM,
                  level.comm);
    // Only variables that still take two or more values can be halved.
    double strongest = 0;
    for (std::size_t v = 0; v < n_vars; ++v)
        if (ghi[v] > glo[v])
            strongest = std::max(strongest, gmoves[v]);
    std::vector<int> shift(n_vars, 0);
    std::string halved;
    int chosen = 0;
    for (std::size_t v = 0; v < n_vars; ++v)
        if (ghi[v] > glo[v] && gmoves[v] >= variable_strength * strongest) {
            shift[v] = 1;
            ++chosen;
            if (!halved.empty())
                halved += '+';
            halved += std::to_string(v);
        }
    // Aggregates of two states make a W-cycle cost as much on every level (and
    // double the levels): with one variable to halve, quarter it instead.
    if (chosen == 1)
        for (auto& s : shift)
            s *= 2;

    Grouping g;
    g.how = fmt::format("coordinates, {} variable(s) {}", chosen == 1 ? "quartering" : "halving",
                        halved.empty() ? std::string("none") : halved);
    g.aggregate.resize(static_cast<std::size_t>(level.local));
    g.coordinates.assign(n_vars, {});
    // One number per coarse point in mixed radix; ranges of the variables of real
    // chains are far below what overflows 64 bits, and a collision would only
    // merge two aggregates, never give a wrong answer. A dense table when the
    // coarse grid is not much larger than this rank's rows, else a hash map.
    std::uint64_t grid = 1;
    bool dense = true;
    for (std::size_t v = 0; v < n_vars; ++v) {
        const auto span = static_cast<std::uint64_t>(((ghi[v] - glo[v]) >> shift[v]) + 1);
        dense = dense && grid <= (std::uint64_t(1) << 40) / span;
        grid *= span;
    }
    dense = dense && grid <= 4 * static_cast<std::uint64_t>(level.local) + 4096;
    std::vector<PetscInt> table(dense ? grid : 0, -1);
    std::unordered_map<std::uint64_t, PetscInt> id;
    if (!dense)
        id.reserve(static_cast<std::size_t>(level.local) / 2 + 1);
    for (PetscInt i = 0; i < level.local; ++i) {
        std::uint64_t key = 0;
        for (std::size_t v = 0; v < n_vars; ++v) {
            const auto span = static_cast<std::uint64_t>(((ghi[v] - glo[v]) >> shift[v]) + 1);
            key = key * span +
                  static_cast<std::uint64_t>((level.coordinates[v][i] - glo[v]) >> shift[v]);
        }
        PetscInt& slot = dense ? table[key] : id.try_emplace(key, -1).first->second;
        if (slot < 0) {
            slot = g.count++;
            for (std::size_t v = 0; v < n_vars; ++v)
                g.coordinates[v].push_back((level.coordinates[v][i] - glo[v]) >> shift[v]);
        }
        g.aggregate[i] = slot;
    }
    return g;
}

Grouping group_by_strength(const AggregationLevel& level, double theta) {
    const PetscInt n = level.local;
    const auto& A = level.owned;
    // Strong graph on local rows, made symmetric.
    std::vector<std::vector<PetscInt>> strong(static_cast<std::size_t>(n));
    for (PetscInt i = 0; i < n; ++i) {
        double largest = 0;
        for (PetscInt k = A.row_start[i]; k < A.row_start[i + 1]; ++k)
            if (A.column[k] != i)
                largest = std::max(largest, std::abs(A.value[k]));
        for (PetscInt k = level.ghost.row_start[i]; k < level.ghost.row_start[i + 1]; ++k)
            largest = std::max(largest, std::abs(level.ghost.value[k]));
        for (PetscInt k = A.row_start[i]; k < A.row_start[i + 1]; ++k) {
            const PetscInt j = A.column[k];
            if (j != i && largest > 0 && std::abs(A.value[k]) >= theta * largest) {
                strong[i].push_back(j);
                strong[j].push_back(i);
            }
        }
    }
    for (auto& s : strong) {
        std::sort(s.begin(), s.end());
        s.erase(std::unique(s.begin(), s.end()), s.end());
    }
    Grouping g;
    g.how = fmt::format("strong connections (theta {})", theta);
    constexpr PetscInt none = -1;
    g.aggregate.assign(static_cast<std::size_t>(n), none);
    // Pass 1: whole untouched neighbourhoods become aggregates.
    for (PetscInt i = 0; i < n; ++i) {
        if (g.aggregate[i] != none)
            continue;
        bool free = true;
        for (PetscInt j : strong[i])
            free = free && g.aggregate[j] == none;
        if (!free || strong[i].empty())
            continue;
        g.aggregate[i] = g.count;
        for (PetscInt j : strong[i])
            g.aggregate[j] = g.count;
        ++g.count;
    }
    // Pass 2: the rest join a neighbouring aggregate from pass 1.
    std::vector<PetscInt> joined = g.aggregate;
    for (PetscInt i = 0; i < n; ++i) {
        if (g.aggregate[i] != none)
            continue;
        for (PetscInt j : strong[i])
            if (g.aggregate[j] != none) {
                joined[i] = g.aggregate[j];
                break;
            }
    }
    g.aggregate = std::move(joined);
    // Pass 3: what is left groups with its unassigned neighbours, or stays alone.
    for (PetscInt i = 0; i < n; ++i) {
        if (g.aggregate[i] != none)
            continue;
        g.aggregate[i] = g.count;
        for (PetscInt j : strong[i])
            if (g.aggregate[j] == none)
                g.aggregate[j] = g.count;
        ++g.count;
    }
    return g;
}

} // namespace longrun::solve

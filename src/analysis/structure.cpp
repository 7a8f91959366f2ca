#include "structure.hpp"

#include "io/error.hpp"
#include "io/mpi_agree.hpp"

#include <algorithm>
#include <limits>
#include <numeric>
#include <string>

namespace longrun::analysis {

namespace {

using Index = std::uint32_t;
constexpr Index unvisited = std::numeric_limits<Index>::max();

struct Graph {
    std::vector<std::uint64_t> offsets; // states + 1
    std::vector<Index> targets;         // positive-weight edges, self-loops excluded
};

// Tarjan's algorithm without recursion (a 10^7-state chain would overflow the
// call stack). Components come out in reverse topological order.
std::vector<Index> strongly_connected(const Graph& g, Index& count) {
    const Index n = static_cast<Index>(g.offsets.size() - 1);
    std::vector<Index> index(n, unvisited), low(n, 0), component(n, unvisited);
    std::vector<Index> stack;
    std::vector<bool> on_stack(n, false);
    struct Frame {
        Index v;
        std::uint64_t next;
    };
    std::vector<Frame> calls;
    Index counter = 0;
    count = 0;
    for (Index root = 0; root < n; ++root) {
        if (index[root] != unvisited)
            continue;
        auto open = [&](Index v) {
            index[v] = low[v] = counter++;
            stack.push_back(v);
            on_stack[v] = true;
            calls.push_back({v, g.offsets[v]});
        };
        open(root);
        while (!calls.empty()) {
            Frame& f = calls.back();
            const Index v = f.v;
            if (f.next < g.offsets[v + 1]) {
                const Index w = g.targets[f.next++];
                if (index[w] == unvisited)
                    open(w); // invalidates f
                else if (on_stack[w])
                    low[v] = std::min(low[v], index[w]);
                continue;
            }
            calls.pop_back();
            if (!calls.empty())
                low[calls.back().v] = std::min(low[calls.back().v], low[v]);
            if (low[v] == index[v]) {
                Index w;
                do {
                    w = stack.back();
                    stack.pop_back();
                    on_stack[w] = false;
                    component[w] = count;
                } while (w != v);
                ++count;
            }
        }
    }
    return component;
}

std::uint64_t gcd(std::uint64_t a, std::uint64_t b) {
    while (b) {
        a %= b;
        std::swap(a, b);
    }
    return a;
}

// Period of a closed class: the gcd over its edges u -> v of
// level(u) + 1 - level(v), with levels from a breadth-first search.
// `level` is all -1 on entry and is left so (reset through the queue), so that
// many closed classes cost their own size each, not the chain's.
std::uint64_t period_of(const Graph& g, Index first, bool self_loop,
                        const std::vector<Index>& component, Index c,
                        std::vector<std::int64_t>& level) {
    if (self_loop)
        return 1;
    std::vector<Index> queue{first};
    level[first] = 0;
    std::uint64_t d = 0;
    // Once the gcd is 1 it stays 1: most closed classes are aperiodic and give that
    // away within a few levels, which saves the rest of a search whose random
    // accesses were a quarter of `check` on a 10^7-state graph walk.
    for (std::size_t head = 0; head < queue.size() && d != 1; ++head) {
        const Index u = queue[head];
        for (auto k = g.offsets[u]; k < g.offsets[u + 1]; ++k) {
            const Index v = g.targets[k];
            if (component[v] != c)
                continue;
            if (level[v] < 0) {
                level[v] = level[u] + 1;
                queue.push_back(v);
            } else {
                const std::int64_t diff = level[u] + 1 - level[v];
                d = gcd(d, static_cast<std::uint64_t>(diff < 0 ? -diff : diff));
            }
        }
    }
    for (auto v : queue)
        level[v] = -1;
    return d == 0 ? 1 : d;
}

} // namespace

Structure analyse(MPI_Comm comm, const solve::LocalRows& in, bool want_class_of) {
    const int rank = comm_rank(comm), size = comm_size(comm);
    const bool dtmc = in.time == solve::TimeModel::discrete;

    // Local edges of positive weight; self-loops only counted (they matter for a
    // dtmc's period, not for reachability).
    std::vector<std::uint64_t> degree(in.rows.size(), 0);
    std::vector<Index> local_targets;
    std::vector<std::uint8_t> local_loop(in.rows.size(), 0);
    std::vector<std::uint8_t> local_weak; // per kept edge: 1 when weak (see Structure)
    std::uint64_t loops = 0, zeros = 0;
    std::optional<LocalFault> fault;
    if (in.states >= std::numeric_limits<Index>::max())
        fault = LocalFault{0, ExitCode::bad_input,
                           "structure analysis handles up to 2^32 - 2 states; this chain has " +
                               std::to_string(in.states) + " (use --no-analysis)"};
    agree_or_throw(comm, fault);
    std::uint64_t mine = in.targets.size(), total = 0;
    MPI_Allreduce(&mine, &total, 1, MPI_UINT64_T, MPI_SUM, comm);
    if (total > static_cast<std::uint64_t>(std::numeric_limits<int>::max()))
        fault = LocalFault{0, ExitCode::bad_input,
                           "structure analysis gathers the graph on one rank, at most 2^31 - 1 "
                           "transitions; this chain has " +
                               std::to_string(total) + " (use --no-analysis)"};
    agree_or_throw(comm, fault);
    local_targets.reserve(in.targets.size());
    local_weak.reserve(in.targets.size());
    std::uint64_t weak = 0;
    for (std::size_t i = 0; i < in.rows.size(); ++i) {
        const std::uint64_t row = in.rows.begin + i;
        double strongest = 0;
        for (auto k = in.offsets[i]; k < in.offsets[i + 1]; ++k)
            if (in.targets[k] != row)
                strongest = std::max(strongest, in.weights[k]);
        for (auto k = in.offsets[i]; k < in.offsets[i + 1]; ++k) {
            if (!(in.weights[k] > 0)) {
                ++zeros;
                continue;
            }
            if (in.targets[k] == row) {
                ++loops;
                local_loop[i] = 1;
                continue;
            }
            local_targets.push_back(static_cast<Index>(in.targets[k]));
            const bool is_weak = in.weights[k] < Structure::weak_ratio * strongest;
            local_weak.push_back(is_weak ? 1 : 0);
            weak += is_weak;
            ++degree[i];
        }
    }

    // Gather to rank 0 (MPI counts are int: both limits were checked above).
    auto gather = [&](const auto& local, auto& all, MPI_Datatype type) {
        int mine = static_cast<int>(local.size());
        std::vector<int> counts(size), displs(size, 0);
        MPI_Gather(&mine, 1, MPI_INT, counts.data(), 1, MPI_INT, 0, comm);
        if (rank == 0) {
            for (int r = 1; r < size; ++r)
                displs[r] = displs[r - 1] + counts[r - 1];
            all.resize(static_cast<std::size_t>(displs.back()) + counts.back());
        }
        MPI_Gatherv(local.data(), mine, type, all.data(), counts.data(), displs.data(), type, 0,
                    comm);
    };
    Graph g;
    std::vector<std::uint64_t> all_degree;
    std::vector<std::uint8_t> all_loop;
    gather(degree, all_degree, MPI_UINT64_T);
    gather(local_loop, all_loop, MPI_UINT8_T);
    gather(local_targets, g.targets, MPI_UINT32_T);
    std::vector<Index>().swap(local_targets);
    std::uint64_t weak_total = 0;
    MPI_Allreduce(&weak, &weak_total, 1, MPI_UINT64_T, MPI_SUM, comm);
    std::vector<std::uint8_t> all_weak; // 1 byte per edge, only when needed
    if (weak_total > 0)
        gather(local_weak, all_weak, MPI_UINT8_T);
    std::vector<std::uint8_t>().swap(local_weak);

    Structure s;
    s.states = in.states;
    MPI_Allreduce(&loops, &s.self_loops, 1, MPI_UINT64_T, MPI_SUM, comm);
    MPI_Allreduce(&zeros, &s.zero_weights, 1, MPI_UINT64_T, MPI_SUM, comm);

    std::vector<Index> component;
    std::vector<std::uint64_t> summary; // flattened for the broadcast
    if (rank == 0) {
        const std::uint64_t n = in.states;
        g.offsets.assign(n + 1, 0);
        for (std::uint64_t v = 0; v < n; ++v)
            g.offsets[v + 1] = g.offsets[v] + all_degree[v];
        s.edges = g.targets.size();
        s.min_out_degree = n ? *std::min_element(all_degree.begin(), all_degree.end()) : 0;
        s.max_out_degree = n ? *std::max_element(all_degree.begin(), all_degree.end()) : 0;
        s.mean_out_degree = n ? double(s.edges) / double(n) : 0;
        {
            std::vector<std::uint32_t> in_degree(n, 0);
            for (auto t : g.targets)
                ++in_degree[t];
            s.max_in_degree = n ? *std::max_element(in_degree.begin(), in_degree.end()) : 0;
        }
        s.weak_edges = weak_total;
        if (weak_total > 0) {
            Graph strong;
            strong.offsets.assign(n + 1, 0);
            strong.targets.reserve(g.targets.size() - weak_total);
            for (std::uint64_t v = 0; v < n; ++v) {
                for (auto k = g.offsets[v]; k < g.offsets[v + 1]; ++k)
                    if (!all_weak[k])
                        strong.targets.push_back(g.targets[k]);
                strong.offsets[v + 1] = strong.targets.size();
            }
            std::vector<std::uint8_t>().swap(all_weak);
            Index blocks = 0;
            const auto block = strongly_connected(strong, blocks);
            std::vector<std::uint64_t> block_size(blocks, 0);
            for (auto b : block)
                ++block_size[b];
            for (auto size_of_block : block_size)
                if (size_of_block >= 2) {
                    ++s.strong_blocks;
                    s.states_in_blocks += size_of_block;
                }
        }
        Index count = 0;
        component = strongly_connected(g, count);
        s.components = count;
        std::vector<std::uint64_t> comp_size(count, 0);
        std::vector<bool> leaves(count, false);
        std::vector<bool> has_loop(count, false);
        for (std::uint64_t v = 0; v < n; ++v) {
            ++comp_size[component[v]];
            if (all_loop[v])
                has_loop[component[v]] = true;
            for (auto k = g.offsets[v]; k < g.offsets[v + 1]; ++k)
                if (component[g.targets[k]] != component[v])
                    leaves[component[v]] = true;
        }
        {
            std::vector<std::uint64_t> sizes = comp_size;
            const auto keep = std::min<std::size_t>(5, sizes.size());
            std::partial_sort(sizes.begin(), sizes.begin() + keep, sizes.end(), std::greater<>());
            s.largest_components.assign(sizes.begin(), sizes.begin() + keep);
        }
        // Closed classes in order of their lowest state.
        std::vector<Index> closed_index(count, unvisited);
        std::vector<Index> first_member;
        for (std::uint64_t v = 0; v < n; ++v) {
            const Index c = component[v];
            if (leaves[c]) {
                ++s.transient;
                if (s.transient_representatives.size() < 10)
                    s.transient_representatives.push_back(v);
                continue;
            }
            if (closed_index[c] == unvisited) {
                closed_index[c] = static_cast<Index>(s.closed.size());
                s.closed.push_back({comp_size[c], 0, {}});
                first_member.push_back(static_cast<Index>(v));
            }
            auto& cls = s.closed[closed_index[c]];
            if (cls.representatives.size() < 10)
                cls.representatives.push_back(v);
        }
        if (dtmc) {
            std::vector<std::int64_t> level(n, -1);
            for (std::size_t k = 0; k < s.closed.size(); ++k) {
                const Index c = component[first_member[k]];
                s.closed[k].period =
                    period_of(g, first_member[k], has_loop[c], component, c, level);
            }
        }
        if (want_class_of) {
            for (auto& c : component)
                c = closed_index[c] == unvisited ? Structure::not_closed : closed_index[c];
        }
        // Flatten: edges, degrees, components, largest, transient, reps, classes.
        summary = {s.edges,
                   s.min_out_degree,
                   s.max_out_degree,
                   s.max_in_degree,
                   s.weak_edges,
                   s.strong_blocks,
                   s.states_in_blocks,
                   s.components,
                   s.largest_components.size()};
        summary.insert(summary.end(), s.largest_components.begin(), s.largest_components.end());
        summary.push_back(s.transient);
        summary.push_back(s.transient_representatives.size());
        summary.insert(summary.end(), s.transient_representatives.begin(),
                       s.transient_representatives.end());
        summary.push_back(s.closed.size());
        for (const auto& c : s.closed) {
            summary.push_back(c.size);
            summary.push_back(c.period);
            summary.push_back(c.representatives.size());
            summary.insert(summary.end(), c.representatives.begin(), c.representatives.end());
        }
    }
    unsigned long length = summary.size();
    MPI_Bcast(&length, 1, MPI_UNSIGNED_LONG, 0, comm);
    summary.resize(length);
    MPI_Bcast(summary.data(), static_cast<int>(length), MPI_UINT64_T, 0, comm);
    MPI_Bcast(&s.mean_out_degree, 1, MPI_DOUBLE, 0, comm);
    if (rank != 0) {
        std::size_t at = 0;
        auto next = [&] { return summary[at++]; };
        s.edges = next();
        s.min_out_degree = next();
        s.max_out_degree = next();
        s.max_in_degree = next();
        s.weak_edges = next();
        s.strong_blocks = next();
        s.states_in_blocks = next();
        s.components = next();
        for (auto k = next(); k > 0; --k)
            s.largest_components.push_back(next());
        s.transient = next();
        for (auto k = next(); k > 0; --k)
            s.transient_representatives.push_back(next());
        for (auto k = next(); k > 0; --k) {
            ClosedClass c;
            c.size = next();
            c.period = next();
            for (auto r = next(); r > 0; --r)
                c.representatives.push_back(next());
            s.closed.push_back(std::move(c));
        }
    }
    if (want_class_of) {
        s.class_of.resize(in.states);
        if (rank == 0)
            std::copy(component.begin(), component.end(), s.class_of.begin());
        // In pieces: MPI counts are int.
        constexpr std::uint64_t piece = 1u << 30;
        for (std::uint64_t at = 0; at < in.states; at += piece) {
            const int n = static_cast<int>(std::min(piece, in.states - at));
            MPI_Bcast(s.class_of.data() + at, n, MPI_UINT32_T, 0, comm);
        }
    }
    return s;
}

} // namespace longrun::analysis

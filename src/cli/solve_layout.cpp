#include "solve_layout.hpp"

#include "partition/adjacency.hpp"
#include "partition/contiguous.hpp"
#include "partition/contiguous_quality.hpp"
#include "partition/graph_partition.hpp"
#include "partition/quality.hpp"

#include <fmt/format.h>

#include <chrono>
#include <stdexcept>

namespace longrun::cli {

namespace {

std::string describe(const partition::Quality& q) {
    return fmt::format("volume {}, off-rank nonzeros {}, cut {}, imbalance {:.3f}", q.volume,
                       q.off_rank_nonzeros, q.edge_cut, q.imbalance);
}

double seconds_since(std::chrono::steady_clock::time_point start) {
    return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

} // namespace

SolveLayout::SolveLayout(MPI_Comm comm, const io::Chain& chain, const solve::LocalRows& file_rows,
                         partition::Layout requested, const std::string& blocker)
    : rows_(file_rows) {
    using partition::Layout;
    outcome_.requested = requested;
    int size = 1;
    MPI_Comm_size(comm, &size);
    if (size == 1) {
        outcome_.reason = "one rank: nothing to partition";
        return;
    }
    const auto start = std::chrono::steady_clock::now();
    const partition::CsrView csr{chain.states, chain.rows, chain.offsets, chain.targets};
    const std::vector<RowRange> ranges = partition::gather_ranges(comm, chain.rows);
    // Every rank holds the same ranges, so every rank takes the same branch.
    if (!partition::ranges_cover_in_order(ranges, chain.states)) {
        outcome_.reason = "rows kept as read (not in rank order), not measured";
        outcome_.seconds = seconds_since(start);
        return;
    }
    // The rows as read are measured from their own targets: one pass, all the
    // gate below needs, cheap enough for every multi-rank solve.
    outcome_.contiguous = partition::contiguous_quality(comm, csr, ranges);
    outcome_.measure_seconds = seconds_since(start);
    const bool tries_graph =
        requested != Layout::contiguous && blocker.empty() &&
        (requested == Layout::graph || partition::communication_visible(*outcome_.contiguous));
    // The edge cut comes from the adjacency when that is built anyway, else from
    // one exchange of the off-rank transitions.
    if (!tries_graph)
        outcome_.contiguous->edge_cut = partition::contiguous_edge_cut(comm, csr, ranges);
    if (requested == Layout::contiguous) {
        // The measuring is cheap; the partitioner is not, and on chains without
        // locality (random graphs) it cannot help: only a hint, the user decides.
        outcome_.reason =
            partition::communication_visible(*outcome_.contiguous)
                ? fmt::format("requested; the busiest rank receives {} vector entries per "
                              "product against {} nonzeros: if the states are numbered without "
                              "regard to their neighbours (hashed, shuffled), --partition auto "
                              "may cut that",
                              outcome_.contiguous->max_volume, outcome_.contiguous->max_nonzeros)
                : "requested";
    } else if (!blocker.empty()) {
        outcome_.reason = "graph partition not used: " + blocker;
    } else if (!tries_graph) {
        outcome_.reason = fmt::format(
            "contiguous kept: the busiest rank receives {} vector entries per product against "
            "{} nonzeros, too few to partition for",
            outcome_.contiguous->max_volume, outcome_.contiguous->max_nonzeros);
    } else {
        const partition::Adjacency adjacency = partition::symmetrised_adjacency(comm, csr, ranges);
        outcome_.contiguous->edge_cut = partition::edge_cut_in_place(comm, adjacency);
        std::vector<std::uint64_t> parts;
        std::string failure;
        try {
            parts = partition::graph_parts(comm, csr, adjacency);
        } catch (const std::runtime_error& e) {
            failure = e.what();
        }
        // A failed partitioner is no reason to fail the solve: every rank agrees
        // to keep the contiguous blocks.
        int failed = failure.empty() ? 0 : 1;
        MPI_Allreduce(MPI_IN_PLACE, &failed, 1, MPI_INT, MPI_LOR, comm);
        if (failed) {
            outcome_.reason = "graph partition failed" + (failure.empty() ? "" : ": " + failure);
        } else {
            outcome_.graph = partition::measure_quality(comm, csr, adjacency, ranges, parts);
            const bool pays = partition::graph_pays_off(*outcome_.contiguous, *outcome_.graph);
            if (requested == Layout::graph || pays) {
                outcome_.used = Layout::graph;
                outcome_.reason =
                    requested == Layout::graph
                        ? "requested"
                        : fmt::format("graph {} against contiguous {}", describe(*outcome_.graph),
                                      describe(*outcome_.contiguous));
                redistribution_.emplace(comm, chain.rows, parts);
                moved_ = redistribution_->move(csr, chain.weights);
                rows_.rows = moved_->rows;
                rows_.offsets = moved_->offsets;
                rows_.targets = moved_->targets;
                rows_.weights = moved_->weights;
            } else {
                outcome_.reason =
                    fmt::format("contiguous kept: graph {} does not halve contiguous {}",
                                describe(*outcome_.graph), describe(*outcome_.contiguous));
            }
        }
    }
    outcome_.seconds = seconds_since(start);
}

std::vector<double> SolveLayout::to_solve_order(std::span<const double> file_order) const {
    if (!redistribution_)
        return {file_order.begin(), file_order.end()};
    return redistribution_->to_new_order(file_order);
}

std::vector<double> SolveLayout::to_file_order(std::span<const double> solve_order) const {
    if (!redistribution_)
        return {solve_order.begin(), solve_order.end()};
    return redistribution_->to_file_order(solve_order);
}

solve::StateCoordinates SolveLayout::to_solve_order(solve::StateCoordinates file_order) const {
    if (redistribution_)
        for (auto& v : file_order.values)
            v = redistribution_->to_new_order<std::int64_t>(v);
    return file_order;
}

} // namespace longrun::cli

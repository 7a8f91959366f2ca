// Which rows each rank holds during the solve: the contiguous blocks the chain
// was read in, or the blocks of a graph partition (rows moved and renumbered).
// Everything outside the solve (results, summaries, warm starts) stays in the
// chain file's order; this class translates at that border.
#pragma once

#include "io/chain.hpp"
#include "partition/choice.hpp"
#include "partition/redistribution.hpp"
#include "solve/local_rows.hpp"
#include "solve/method.hpp"

#include <mpi.h>

#include <optional>
#include <span>
#include <string>
#include <vector>

namespace longrun::cli {

// What the report says about the partition.
struct PartitionOutcome {
    partition::Layout requested = partition::Layout::automatic;
    partition::Layout used = partition::Layout::contiguous;
    std::string reason;
    std::optional<partition::Quality> contiguous, graph; // absent on one rank
    double seconds = 0;         // measuring, adjacency, partitioner and moving the rows
    double measure_seconds = 0; // the contiguous numbers alone (what auto's gate costs)
};

class SolveLayout {
  public:
    // Collective. `file_rows` views `chain` as read. A non-empty `blocker` says
    // why rows must stay in file order (the graph partition is then not tried).
    SolveLayout(MPI_Comm comm, const io::Chain& chain, const solve::LocalRows& file_rows,
                partition::Layout requested, const std::string& blocker);

    const solve::LocalRows& rows() const noexcept { return rows_; }
    const PartitionOutcome& outcome() const noexcept { return outcome_; }
    bool moved() const noexcept { return moved_.has_value(); }

    // Collective: per-row values between file order and the solve's order.
    std::vector<double> to_solve_order(std::span<const double> file_order) const;
    std::vector<double> to_file_order(std::span<const double> solve_order) const;
    solve::StateCoordinates to_solve_order(solve::StateCoordinates file_order) const;

  private:
    solve::LocalRows rows_;
    PartitionOutcome outcome_;
    std::optional<partition::Redistribution> redistribution_;
    std::optional<partition::MovedRows> moved_;
};

} // namespace longrun::cli

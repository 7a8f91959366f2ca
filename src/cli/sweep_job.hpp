// `sweep` without the command line: for each value of one model parameter,
// generate the chain, solve it (warm-started from the previous point when the
// state space kept its size), summarise it, and collect one row per value; stop
// at the first value where an --until condition holds and interpolate where it
// was crossed. The CLI formats what this returns; tests call it directly.
#pragma once

#include "model/model_file.hpp"
#include "solve/strategy.hpp"

#include <mpi.h>

#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <vector>

namespace longrun::cli {

// The most values one --vary may give.
inline constexpr std::size_t max_sweep_points = 100000;

// "arrival=2:6:0.25" (start:stop:step, stop included within rounding) or
// "arrival=2,3,5". Throws UsageError on anything else.
struct SweepAxis {
    std::string parameter;
    std::vector<double> values;
};
SweepAxis parse_vary(const std::string& text);

// "P(full) > 0.01": a column, one of > >= < <=, a number. Throws UsageError.
struct SweepCondition {
    std::string column;
    std::string relation; // ">", ">=", "<", "<="
    double threshold = 0;
    std::string text; // as the user wrote it
    bool holds(double value) const;
};
SweepCondition parse_until(const std::string& text);

// The columns a row gets from the summary (besides parameter, states, method,
// residual): mean(X) per measure, qLEVEL(X) per asked quantile level, P(name) per
// tail, rate(e) per event, and a --rate under its own name.
struct SweepRow {
    std::size_t index = 0; // position in the axis
    double value = 0;
    std::uint64_t states = 0;
    std::string method;
    double residual = 0;
    double seconds = 0; // generate + solve + summarise
    bool warm = false;  // the solve started from the previous point's answer
    std::string start;  // how the solve started, as the solve reports it
    std::vector<std::pair<std::string, double>> cells; // column, value
    // ||pi_hat - pi||_1 / 2 of this point's solve: no P(...) cell is off by more.
    // Absent when not estimated. A P(...) cell below twice it is unresolved.
    std::optional<double> error_bound;
    // The largest probability at a state variable's declared bound, e.g.
    // "P(queue = 10)": large where a cut-off (not a real capacity) biases the answer.
    double bound_mass = 0;
    std::string bound_state;

    std::optional<double> cell(const std::string& column) const;
};

struct SweepCrossing {
    bool crossed = false;
    // The first row where the condition holds, and the row before it (none when it
    // holds already at the first value: there is nothing to interpolate from).
    std::optional<std::size_t> before, at;
    std::optional<double> interpolated; // parameter value where the column meets the threshold
    std::string sentence;               // "crossed between arrival=3.25 and 3.5; ..."
};

struct SweepTable {
    std::string model_file;
    SweepAxis axis;
    std::vector<std::string> columns; // summary columns, in order of first appearance
    std::vector<SweepRow> rows;       // in axis order; ends at the crossing
    std::optional<SweepCondition> until;
    SweepCrossing crossing;
};

struct SweepRequest {
    std::string model_path;
    SweepAxis axis;
    model::Overrides sets; // other parameters fixed for the whole sweep
    std::vector<std::string> measures, tails, quantiles, rates;
    std::optional<SweepCondition> until;
    std::string work_folder; // chain and result files of the points
    bool keep = false;       // leave them there (with /summary stored in each result)
    std::string method = "auto";
    double tolerance = 1e-10;      // on the estimated error
    double residual_tolerance = 0; // > 0: on the residual (--residual-tol)
    solve::LinearPreconditioner preconditioner = solve::LinearPreconditioner::amg;
    std::uint64_t max_states = 0;
    std::optional<std::size_t> only; // compute just this point (job arrays)
    bool solver_progress = false;    // the solve's own progress lines and warnings
    // Called on every rank after each point (rank 0 prints).
    std::function<void(const SweepRow&)> on_point;
};

// Collective. Throws UsageError (exit 1) for a parameter the model lacks or an
// --until naming no column; InputError (exit 2) for a bad model; the solve's
// errors as they are (a point that cannot be certified ends the sweep, exit 4).
SweepTable run_sweep(MPI_Comm comm, const SweepRequest& request);

// The crossing of `until` in `rows` (which run_sweep already ends there).
SweepCrossing find_crossing(const std::string& parameter, const std::vector<SweepRow>& rows,
                            const SweepCondition& until);

// Columns in order of first appearance over the rows.
std::vector<std::string> columns_of(const std::vector<SweepRow>& rows);

} // namespace longrun::cli

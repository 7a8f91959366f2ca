// The whole `summarize` job without the command line: read a result file and its
// chain, evaluate the measures, tails, conditions and event rates asked for,
// store them under the result's /summary, and return what the CLI prints, the
// report shows and `sweep` tabulates.
#pragma once

#include "io/result_file.hpp"
#include "io/summary_record.hpp"

#include <mpi.h>

#include <optional>
#include <string>
#include <vector>

namespace longrun::cli {

struct SummaryRequest {
    std::string result_path;
    std::optional<std::string> chain_path; // default: the chain named in the result
    std::vector<std::string> measures;     // "load=waiting+busy"
    std::vector<std::string> tails;        // "load>=40" or "full=queue==capacity"
    std::vector<std::string> quantiles;    // "load:0.999" or "0.999" (every measure)
    std::vector<std::string> given;        // "busy==workers"
    std::vector<std::string> rates;        // "lost_fraction=drop/(drop+admit)"
    std::size_t top = 10;                  // most likely states to list
    bool store = true;                     // write /summary into the result file
    bool progress = true;
};

// What the result file says about how its distribution was obtained.
struct SolveRecord {
    std::string method;
    double residual = 0, tolerance = 0;
    std::string residual_definition;
    bool converged = false;
    std::uint64_t iterations = 0;
    double wall_seconds = 0;
    int ranks = 1;
    std::vector<io::HistoryRecord> history; // residual per iteration, per attempt
    // Estimated ||pi_hat - pi||_1 (inf: not estimated); absent in results from an
    // older longrun, whose numbers then carry no bound.
    std::optional<double> error_estimate;
    std::string error_estimate_method;
};

struct SummaryReport {
    std::string result_path, chain_path;
    std::string kind; // "ctmc" or "dtmc"
    std::uint64_t states = 0, transitions = 0;
    std::string model_file, model_text; // empty when the chain was not generated here
    std::vector<std::pair<std::string, double>> parameters;
    SolveRecord solve;
    io::SummaryRecord summary;
    std::vector<double> default_levels; // quantile levels shown for every measure
    double truncation_threshold = 1e-6;
    std::vector<std::string> warnings; // e.g. mass at a declared bound above the threshold
};

// Collective. Throws InputError (exit 2) for an unreadable result or chain,
// or a chain that does not match the result; UsageError (exit 1) for a bad
// expression or an unknown name.
SummaryReport run_summary(MPI_Comm comm, const SummaryRequest& request);

// Results may feed decisions about people's safety: printed with every summary.
inline constexpr const char* safety_caution =
    "Caution: these numbers hold only under the model's assumptions (exponential "
    "times, independence, the chosen bounds and rates). Where they inform decisions "
    "about people's safety (health services, emergency capacity), treat them as one "
    "input and defer to local codes and licensed practice.";

} // namespace longrun::cli

// `compare` without the command line: every chosen method on every chain, each
// alone (no fallback) with the same tolerance, measured the same way. The CLI
// formats what this returns; tests call it directly.
#pragma once

#include "io/chain_file.hpp"
#include "solve/method.hpp"
#include "solve/strategy.hpp"

#include <mpi.h>

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

namespace longrun::cli {

struct CompareRequest {
    std::vector<std::string> chains;  // chain files (.h5) or Matrix Market files (.mtx)
    std::vector<std::string> methods; // names from solve::method_table(), each run alone
    double tolerance = 1e-10;
    std::optional<io::ChainKind> kind; // Matrix Market files only; detected when absent
    bool transposed = false;           // Matrix Market files hold P^T or Q^T (columns = sources)
    io::ValidationOptions validation;
    solve::LinearPreconditioner preconditioner = solve::LinearPreconditioner::amg;
    // Runs are not started once this many seconds have passed since the start
    // (a run already going is not interrupted); 0: no limit.
    double max_seconds = 0;
    int timing_products = 10; // products timed per chain for the product-equivalents
    bool progress = true;
};

enum class RunStatus { converged, not_converged, skipped, failed };

std::string to_string(RunStatus status);

struct CompareRun {
    std::string chain; // path as given
    std::string method;
    RunStatus status = RunStatus::skipped;
    long iterations = 0;
    long matvecs = 0;                             // PETSc products with the chain's matrix
    double product_equivalents = 0;               // seconds / one product's time
    double seconds = 0;                           // wall
    std::uint64_t peak_memory_bytes = 0;          // process peak after the run, largest rank
    std::uint64_t peak_memory_increase_bytes = 0; // how much the run raised it, largest rank
    std::optional<double> residual;       // final certificate; none when nothing was computed
    std::optional<double> error_estimate; // estimated ||pi_hat - pi||_1; none when not estimated
    std::string outcome;                  // one line
    std::vector<double> history;          // the method's own residual per iteration
    std::vector<double> history_seconds;
};

struct CompareChain {
    std::string path;
    io::ChainKind kind = io::ChainKind::ctmc;
    bool kind_detected = false; // Matrix Market without --kind
    bool transposed = false;    // Matrix Market read with columns as source states
    std::uint64_t states = 0, transitions = 0;
    std::string structure;           // one-line verdict of the analysis
    bool solvable = false;           // a unique stationary distribution exists
    double product_seconds = 0;      // one product with the chain's matrix
    std::string residual_definition; // how the residual is measured for this kind
};

struct CompareReport {
    double tolerance = 0;
    int ranks = 1;
    std::vector<std::string> methods;
    std::vector<CompareChain> chains;
    std::vector<CompareRun> runs; // chain-major, one per (chain, method)
    double wall_seconds = 0;
};

// Every method name a compare can run ("auto" is not one: it falls back).
std::vector<std::string> comparable_methods();

// "all" or a comma-separated list; throws UsageError on an unknown or repeated name.
std::vector<std::string> parse_method_list(const std::string& text);

// Collective. Throws Error on bad input (exit 2); a method that declines, fails
// or misses the tolerance is a row of the report, not an error.
CompareReport run_compare(MPI_Comm comm, const CompareRequest& request);

} // namespace longrun::cli

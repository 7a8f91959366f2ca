// Result file (HDF5, schema "longrun.result" version 1). Written collectively:
// every rank writes its own slice of the distribution; the small parts (which
// every rank holds identically) are written once. The file appears under its
// final name only when complete (AtomicOutput).
#pragma once

#include "../partition/row_range.hpp"

#include <mpi.h>

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

namespace longrun::io {

inline constexpr const char* result_schema = "longrun.result";
inline constexpr std::uint64_t result_schema_version = 1;

struct ResultOrigin {
    std::string chain_path;
    std::uint64_t chain_bytes = 0;
    std::int64_t chain_mtime = 0; // seconds since the epoch
    std::string tool_version;
    std::string kind;
    // io/chain_hash.hpp; empty in results written before longrun recorded it.
    std::string chain_hash, chain_hash_method;
};

struct CertificateRecord {
    std::string method; // the method whose answer was kept
    std::vector<std::string> trace;
    std::uint64_t iterations = 0;
    double residual = 0;
    double tolerance = 0;          // on the estimated error
    double residual_tolerance = 0; // > 0: certified on the residual (--residual-tol)
    double error_estimate = 0;     // estimated ||pi_hat - pi||_1; inf when none
    std::string error_estimate_method;
    double norm_error = 0; // |sum(pi) - 1| before normalisation
    double min_entry = 0;
    double clipped_mass = 0;
    double wall_seconds = 0;
    std::uint64_t peak_memory_bytes = 0; // largest over ranks
    int ranks = 1;
    bool converged = false;
    std::string residual_definition;
    std::optional<double> detailed_balance_violation; // max relative, over state pairs
};

struct HistoryRecord {
    std::string name; // unique per attempt, e.g. "1-linear"
    std::vector<double> residuals;
};

struct DistributionSummary {
    std::string name;
    bool integral = true;
    std::vector<double> values; // distinct values, increasing
    std::vector<double> pmf;    // P(X = values[i])
    std::vector<double> tail;   // P(X >= values[i])
    double mean = 0, std = 0, q50 = 0, q90 = 0, q99 = 0, q999 = 0;
    std::optional<double> mass_at_lower, mass_at_upper; // at declared bounds
};

// Several closed classes (solve --per-class): per class its size, period, how
// well its own stationary law is certified and, given a start, the probability
// of ending in it.
struct ClassesRecord {
    std::vector<std::uint64_t> sizes;
    std::vector<std::uint64_t> periods; // 0 for a ctmc
    std::vector<double> residuals;
    std::vector<double> absorption; // empty without a start
    std::string start;              // how the start was given, or empty
};

// This rank's rows of the per-state class data.
struct LocalClassData {
    std::vector<std::int64_t> class_index; // closed class of each row, -1 if transient
    std::vector<double> within;            // stationary probability within its class
};

struct ResultContent {
    ResultOrigin origin;
    bool has_distribution = true; // false: per-class answer without a start
    std::optional<ClassesRecord> classes;
    CertificateRecord certificate;
    std::vector<HistoryRecord> history;
    std::vector<DistributionSummary> variables;
};

// Collective. `content` must be identical on every rank; `local` holds the
// distribution entries of `rows`. Throws OutputError (and leaves nothing under
// `path`) on any failure.
void write_result_file(const std::string& path, MPI_Comm comm, const ResultContent& content,
                       RowRange rows, std::uint64_t states, const std::vector<double>& local,
                       const LocalClassData* classes = nullptr);

// Serial reader of the distribution (tests, later warm starts).
std::vector<double> read_result_distribution(const std::string& path);

} // namespace longrun::io

// Which methods to try, in which order, and when to stop: the certificate decides.
// Every method returns its best iterate; the strategy keeps the best over all
// attempts and warm-starts each fallback from it.
#pragma once

#include "method.hpp"

#include <string>
#include <vector>

namespace longrun::solve {

using MethodRunner = Attempt (*)(const TransposedChain&, Vec, const MethodSettings&);

struct MethodEntry {
    std::string name;
    std::string summary; // one line for --help
    MethodRunner run;
};

// Every method by name, `auto` excluded.
const std::vector<MethodEntry>& method_table();

struct AttemptRecord {
    std::string method;
    long iterations = 0;
    long matvecs = 0; // PETSc products with the chain's matrix (not inside hypre/MUMPS)
    double seconds = 0;
    double residual = 0;
    double error_estimate = INFINITY;
    bool met = false;
    std::string outcome; // one line: what happened
    std::vector<double> history;
    std::vector<double> history_seconds;
    std::vector<std::string> notes;
};

struct SolveOutcome {
    VecHandle pi; // best iterate, normalised; null only when every method threw
    Certificate certificate;
    std::string method; // the one whose answer was kept
    long iterations = 0;
    bool met = false;
    std::vector<std::string> plan; // the methods in the order auto meant to try them
    std::string plan_reason;       // why this order (auto), one line
    std::vector<AttemptRecord> attempts;
};

// What `auto` looks at. Filled by the caller from the chain and its analysis.
struct ChainTraits {
    std::uint64_t states = 0;
    std::uint64_t transitions = 0;
    TimeModel time = TimeModel::continuous;
    std::uint64_t period = 1;         // dtmc; 0 when unknown
    bool nearly_decomposable = false; // weakly coupled blocks suspected
    int ranks = 1;
    std::uint64_t memory_per_rank_bytes = 0; // available; 0 when unknown
};

// One phrase for a certificate against the settings' targets, e.g.
// "estimated error 3.1e-12 <= 1.0e-10, residual 4.0e-14".
std::string describe(const Certificate& c, const MethodSettings& s);

std::vector<std::string> method_names(); // "auto" first
// `method` is "auto", a name, or a comma-separated list tried in order.
// Throws UsageError on an unknown name.
std::vector<std::string> plan_for(const std::string& method, const ChainTraits& traits,
                                  std::string* reason = nullptr);

// `warm_start` may be null (normalised iterate with a's layout otherwise).
SolveOutcome solve_stationary(const TransposedChain& a, const std::string& method,
                              const MethodSettings& settings, const ChainTraits& traits = {},
                              Vec warm_start = nullptr);

} // namespace longrun::solve

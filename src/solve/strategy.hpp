// Which methods to try, in which order, and when to stop: the certificate decides.
// `auto` tries `linear` (GMRES + AMG on the pinned system: fastest on the chains
// measured so far, see DESIGN.md) and falls back to `eigen`, warm-started from
// the best iterate so far, when the certificate is not met or the method fails.
#pragma once

#include "method.hpp"

#include <string>
#include <vector>

namespace longrun::solve {

struct AttemptRecord {
    std::string method;
    long iterations = 0;
    double residual = 0;
    bool met = false;
    std::string outcome; // one line: what happened
    std::vector<double> history;
    std::vector<std::string> notes;
};

struct SolveOutcome {
    VecHandle pi; // best iterate, normalised; null only when every method threw
    Certificate certificate;
    std::string method; // the one whose answer was kept
    long iterations = 0;
    bool met = false;
    std::vector<AttemptRecord> attempts;
};

std::vector<std::string> method_names();
// Throws UsageError on an unknown name.
std::vector<std::string> plan_for(const std::string& method);

SolveOutcome solve_stationary(const TransposedChain& a, const std::string& method,
                              const MethodSettings& settings);

} // namespace longrun::solve

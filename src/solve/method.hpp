// What every method takes and gives. Methods return their best iterate with its
// certificate; whether that is good enough is the strategy's decision.
#pragma once

#include "assemble.hpp"
#include "certificate.hpp"
#include "progress.hpp"

#include <string>
#include <vector>

namespace longrun::solve {

enum class LinearPreconditioner { amg, ilu, lu };

struct MethodSettings {
    double tolerance = 1e-10; // on the certificate's residual
    int max_rounds = 5;       // solve, certify, tighten the solver's tolerance, repeat
    LinearPreconditioner preconditioner = LinearPreconditioner::amg;
    Progress* progress = nullptr;
};

struct Attempt {
    std::string method;
    VecHandle x;                 // normalised (sum 1)
    Certificate certificate;     // of x
    long iterations = 0;         // the method's own iterations, over all rounds
    std::vector<double> history; // the method's own residual per iteration
    std::vector<std::string> notes;
};

// `warm_start` may be null; otherwise a normalised iterate with a's layout.
Attempt run_linear(const TransposedChain& a, Vec warm_start, const MethodSettings& settings);
Attempt run_eigen(const TransposedChain& a, Vec warm_start, const MethodSettings& settings);

} // namespace longrun::solve

namespace longrun::solve {

// A valid certificate beats an invalid one; then the smaller residual wins.
inline bool is_better(const Certificate& c, const Attempt& so_far) {
    if (!so_far.x)
        return true;
    const auto& p = so_far.certificate;
    if (c.valid != p.valid)
        return c.valid;
    return c.residual < p.residual;
}

// Copies `candidate` (certified as `c`) into the attempt when it beats its best.
void keep_if_better(Attempt& attempt, const TransposedChain& a, Vec candidate,
                    const Certificate& c);

// The method's own tolerance for the next round. Its residual and the certificate
// differ by a scale (the pin, the eigenvector's norm), so tighten by the factor the
// certificate still misses, with a margin of 10.
double tightened(double current, const Certificate& c, double target);

} // namespace longrun::solve

// What every method takes and gives. Methods return their best iterate with its
// certificate; whether that is good enough is the strategy's decision.
#pragma once

#include "assemble.hpp"
#include "certificate.hpp"
#include "progress.hpp"

#include <chrono>
#include <cstdint>
#include <string>
#include <vector>

namespace longrun::solve {

enum class LinearPreconditioner { amg, ilu, asm_ilu, lu };

// "amg", "ilu", "asm" or "lu"; anything else is amg (the CLI checks the name).
inline LinearPreconditioner preconditioner_named(const std::string& name) {
    return name == "ilu"   ? LinearPreconditioner::ilu
           : name == "asm" ? LinearPreconditioner::asm_ilu
           : name == "lu"  ? LinearPreconditioner::lu
                           : LinearPreconditioner::amg;
}

// Where methods hand their current iterate, for checkpoints. Both calls are
// collective: due() returns the same answer on every rank (rank 0's clock
// decides), so that save() is entered by all ranks or by none.
class IterateSink {
  public:
    virtual ~IterateSink() = default;
    virtual bool due() = 0;
    // `x` need not be normalised; the sink copies what it needs. A failed write is
    // warned about and ends checkpointing, not the solve. It throws only to stop
    // the solve (a stop signal, seen by due() on every rank alike): callers inside
    // a PETSc callback must catch it and rethrow it outside PETSc.
    virtual void save(Vec x, const std::string& method, long iteration) = 0;
};

// Per-state values of the chain's state variables for this rank's rows
// (variable-major: values[v][i - rows.begin]); empty when the chain has none.
// Methods may use them to group states (aggregation by structure).
struct StateCoordinates {
    std::vector<std::string> names;
    std::vector<std::vector<std::int64_t>> values;
};

struct MethodSettings {
    double tolerance = 1e-10;      // on the estimated error ||pi_hat - pi||_1
    double residual_tolerance = 0; // > 0: certify on the residual instead (--residual-tol)
    int max_rounds = 16;           // solve, certify, tighten the solver's tolerance, repeat
    LinearPreconditioner preconditioner = LinearPreconditioner::amg;
    Progress* progress = nullptr;
    IterateSink* checkpoint = nullptr;             // null: no checkpoints
    const StateCoordinates* coordinates = nullptr; // null: none known
    std::uint64_t memory_limit_bytes = 0;          // per rank; 0: not limited
};

struct Attempt {
    std::string method;
    VecHandle x;                 // normalised (sum 1)
    Certificate certificate;     // of x
    long iterations = 0;         // the method's own iterations, over all rounds
    std::vector<double> history; // the method's own residual per iteration
    std::vector<double> seconds; // since `started`, one per history entry
    std::vector<std::string> notes;
    std::chrono::steady_clock::time_point started = std::chrono::steady_clock::now();
};

// Appends one residual to the history (with its time) and updates the progress line.
void record_iteration(Attempt& attempt, long iteration, double residual,
                      const MethodSettings& settings);

// The methods. `warm_start` may be null; otherwise a normalised iterate with a's
// layout. Each method returns its best iterate with its certificate and never
// decides alone whether that is good enough.
Attempt run_linear(const TransposedChain& a, Vec warm_start, const MethodSettings& settings);
Attempt run_eigen(const TransposedChain& a, Vec warm_start, const MethodSettings& settings);
Attempt run_shift_invert(const TransposedChain& a, Vec warm_start, const MethodSettings& settings);
Attempt run_direct(const TransposedChain& a, Vec warm_start, const MethodSettings& settings);
Attempt run_power(const TransposedChain& a, Vec warm_start, const MethodSettings& settings);
Attempt run_gauss_seidel(const TransposedChain& a, Vec warm_start, const MethodSettings& settings);
Attempt run_gth(const TransposedChain& a, Vec warm_start, const MethodSettings& settings);
Attempt run_aggregation(const TransposedChain& a, Vec warm_start, const MethodSettings& settings);

} // namespace longrun::solve

namespace longrun::solve {

// A valid certificate beats an invalid one; then one with an error estimate
// beats one without (its error is known); then the smaller estimate, and last
// the smaller residual.
inline bool is_better(const Certificate& c, const Attempt& so_far) {
    if (!so_far.x)
        return true;
    const auto& p = so_far.certificate;
    if (c.valid != p.valid)
        return c.valid;
    const bool estimated = std::isfinite(c.error_estimate);
    if (estimated != std::isfinite(p.error_estimate))
        return estimated;
    if (estimated && c.error_estimate != p.error_estimate)
        return c.error_estimate < p.error_estimate;
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

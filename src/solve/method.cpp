#include "method.hpp"

#include <algorithm>

namespace longrun::solve {

void keep_if_better(Attempt& attempt, const TransposedChain& a, Vec candidate,
                    const Certificate& c) {
    if (!is_better(c, attempt))
        return;
    if (!attempt.x)
        attempt.x = create_state_vector(a);
    check(VecCopy(candidate, attempt.x), "VecCopy");
    attempt.certificate = c;
}

void record_iteration(Attempt& attempt, long iteration, double residual,
                      const MethodSettings& settings) {
    attempt.history.push_back(residual);
    attempt.seconds.push_back(
        std::chrono::duration<double>(std::chrono::steady_clock::now() - attempt.started).count());
    if (settings.progress)
        settings.progress->update(iteration, residual);
}

double tightened(double current, const Certificate& c, double target) {
    const double missing = c.valid ? target / c.residual : 1e-2;
    return std::max(current * std::min(0.5, 0.1 * missing), 1e-15);
}

} // namespace longrun::solve

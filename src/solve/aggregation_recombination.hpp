// Top-level acceleration of the aggregation cycles by iterant recombination
// (De Sterck, Miller, Sanders and Winlaw, "Recursively accelerated multilevel
// aggregation for Markov chains", SIAM J. Sci. Comput. 32(3), 2010; and De
// Sterck, Manteuffel, Miller and Sanders, "Top-level acceleration of adaptive
// algebraic multilevel methods for steady-state solution to Markov chains",
// Adv. Comput. Math. 35, 2011): the next iterate is the combination of the last
// few cycle outputs x_k (each of sum 1) with coefficients summing to 1 that
// minimises the 2-norm of its residual, sum_k c_k A x_k.
#pragma once

#include "handles.hpp"

#include <vector>

namespace longrun::solve {

class IterantRecombination {
  public:
    // `like` gives the layout; `window` >= 1 iterates are kept (1: no acceleration).
    IterantRecombination(Vec like, int window);
    // Collective. Remembers x (sum 1) and its residual vector r = A x.
    void push(Vec x, Vec r);
    enum class Outcome {
        none,     // fewer than two iterates or a degenerate problem: outputs untouched
        combined, // x_out and its residual vector r_out = sum c_k r_k
        lifted,   // x_out, but some entries were lifted: r_out is not its residual
    };
    // Collective. Writes the best combination into x_out and its residual vector
    // into r_out. Entries that come out non-positive take the newest iterate's
    // value instead, since the coarse operators need a positive iterate.
    Outcome combine(Vec x_out, Vec r_out);
    // After combine(): the 1-norm of what lifting added to x_out (before any scaling).
    double lifted_mass() const { return lifted_mass_; }

  private:
    int window_;
    double lifted_mass_ = 0;
    int count_ = 0, newest_ = -1;
    std::vector<VecHandle> x_, r_;
    std::vector<double> gram_; // window_ x window_, of the r's by slot
};

} // namespace longrun::solve

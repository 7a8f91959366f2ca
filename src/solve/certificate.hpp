// The certificate: the only judge of success (never a solver's own flag).
//   dtmc: ||pi P - pi||_1        ctmc: ||pi Q||_1 / max_i |q_ii|  (uniformised)
// pi is first scaled to sum 1; entries below -1e-14 make it invalid, smaller
// negatives are clipped to 0 and their mass reported.
#pragma once

#include "assemble.hpp"

#include <cmath>
#include <string>

namespace longrun::solve {

inline constexpr double negative_entry_limit = -1e-14;

struct Certificate {
    double residual = 0;
    double min_entry = 0;    // before clipping
    double clipped_mass = 0; // total |negative| mass set to 0
    double norm_error = 0;   // |sum(pi) - 1| after normalisation, a rounding check
    bool valid = false;      // finite, normalisable, no significant negative entry
    std::string problem;     // why not valid
    // Estimated ||pi_hat - pi||_1 (error_goal.hpp); infinite until estimated.
    double error_estimate = INFINITY;
    std::string error_estimate_method;
    // Certified: the estimated error is within `error_tolerance`; or, when a
    // residual tolerance is given (> 0, the user's --residual-tol), the residual
    // is within it and an error estimate exists to report beside it.
    bool meets(double error_tolerance, double residual_tolerance = 0) const noexcept {
        if (!valid || !std::isfinite(error_estimate))
            return false;
        return residual_tolerance > 0 ? residual <= residual_tolerance
                                      : error_estimate <= error_tolerance;
    }
};

std::string residual_definition(TimeModel time);

// Collective. Normalises x in place (sum 1, tiny negatives clipped) and certifies it.
Certificate certify(const TransposedChain& a, Vec x);

// Collective. Computes only the residual of an already normalised x.
double residual_of(const TransposedChain& a, Vec x);

} // namespace longrun::solve

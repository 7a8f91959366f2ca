// Marginal distribution of a state variable under the stationary vector: pmf,
// tail P(X >= v), mean, standard deviation and quantiles.
#pragma once

#include <mpi.h>

#include <span>
#include <string>
#include <vector>

namespace longrun::summary {

struct Marginal {
    std::string name;
    bool integral = true;
    std::vector<double> values; // distinct values, increasing
    std::vector<double> pmf;
    std::vector<double> tail; // tail[i] = P(X >= values[i])
    double mean = 0, std = 0;
    double q50 = 0, q90 = 0, q99 = 0, q999 = 0;
};

// Collective. `values` and `pi` are this rank's entries (same length). Every rank
// returns the same Marginal.
Marginal marginal(MPI_Comm comm, const std::string& name, bool integral,
                  std::span<const double> values, std::span<const double> pi);

// Smallest v with P(X <= v) >= p (the usual lower quantile).
double quantile(const Marginal& m, double p);

// P(X >= threshold).
double tail_at(const Marginal& m, double threshold);

// A few thresholds worth printing: where the tail first drops to 1e-1, 1e-2,
// 1e-3, 1e-6 and 1e-9 (deduplicated), as (value, P(X >= value)).
std::vector<std::pair<double, double>> informative_tail(const Marginal& m);

} // namespace longrun::summary

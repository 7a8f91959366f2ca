// Distribution, moments, quantiles, tail function and conditional means of one
// per-state quantity X under the stationary vector.
#pragma once

#include "io/summary_record.hpp"

#include <mpi.h>

#include <optional>
#include <span>
#include <string>
#include <vector>

namespace longrun::summary {

// A --given condition evaluated on this rank's rows (1 where it holds, else 0).
struct Condition {
    std::string text;
    std::vector<double> holds;
};

inline constexpr std::size_t default_max_points = 100000;

// Collective. `values`, `pi` and every condition's `holds` are this rank's rows.
// Every rank returns the same record. Quantile levels in (0, 1).
io::MeasureRecord summarize_measure(MPI_Comm comm, const std::string& name,
                                    const std::string& origin, std::span<const double> values,
                                    std::span<const double> pi, std::span<const double> levels,
                                    const std::vector<Condition>& given,
                                    std::size_t max_points = default_max_points);

// Collective. Records the declared bounds and P(X = bound) for each bound given:
// mass piling up at a bound says the bound truncates the model.
void add_bound_masses(MPI_Comm comm, io::MeasureRecord& record, std::span<const double> values,
                      std::span<const double> pi, std::optional<double> lower,
                      std::optional<double> upper);

// Collective: sum over this rank's rows of pi where holds != 0, reduced.
double probability_of(MPI_Comm comm, std::span<const double> holds, std::span<const double> pi);

} // namespace longrun::summary

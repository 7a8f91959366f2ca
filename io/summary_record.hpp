// What `summarize` computes, as plain data: the summary library fills it, the
// result-file writer stores it under /summary, the CLI prints it. No HDF5 and no
// MPI here, so every layer may include it.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <utility>
#include <vector>

namespace longrun::io {

struct QuantileRecord {
    QuantileRecord() = default;
    QuantileRecord(double level_, double value_) : level(level_), value(value_) {}

    double level = 0; // e.g. 0.999
    double value = 0; // smallest x with P(X <= x) >= level
    // P(X >= value) and P(X > value): the tail on either side of the quantile,
    // which decide whether an error bound could move it.
    double tail_at = 0, tail_above = 0;
    // Set by summarize when the solve estimated its error: whether the exact
    // distribution has the same quantile (both tails farther than the bound
    // from 1 - level).
    std::optional<bool> resolved;
};

// E[X | condition] for one --given condition.
struct ConditionalRecord {
    std::string condition;      // as the user wrote it
    double probability = 0;     // P(condition)
    std::optional<double> mean; // absent when P(condition) = 0
};

struct MeasureRecord {
    std::string name;
    std::string origin;   // "state variable", "chain measure", "--measure load=waiting+busy"
    bool integral = true; // every value an integer
    // The distribution of X: distinct values (increasing), P(X = v), P(X >= v).
    // Above `max_points` distinct values they are merged into that many bins of
    // consecutive values (values then holds each bin's lowest value) and
    // `binned` says so; mean, std and quantiles are always exact.
    std::vector<double> values, pmf, tail;
    bool binned = false;
    double mean = 0, std = 0;
    double lowest = 0, highest = 0; // over every state, whatever its probability
    // (highest - lowest) * ||pi_hat - pi||_1 / 2; absent when the error is unknown.
    std::optional<double> mean_error_bound;
    std::vector<QuantileRecord> quantiles;
    std::vector<ConditionalRecord> given;
    // Probability at a state variable's declared bounds (truncation check).
    std::optional<double> lower_bound, upper_bound;
    std::optional<double> mass_at_lower, mass_at_upper;
};

// P(condition) for one --tail "load>=40" (or "name=condition").
struct ProbabilityRecord {
    std::string name;      // "load>=40" or the given name
    std::string condition; // the expression
    double probability = 0;
};

struct EventRateRecord {
    EventRateRecord() = default;
    EventRateRecord(std::string name_, std::string expression_, double rate_, std::string source_)
        : name(std::move(name_)), expression(std::move(expression_)), rate(rate_),
          source(std::move(source_)) {}

    std::string name;
    std::string expression; // empty for a labelled event; the formula of a --rate
    double rate = 0;        // ctmc: per unit time; dtmc: per step
    // How the rate was found: "transition labels", "event intensities", "--rate".
    std::string source;
    // Smallest and largest intensity of one state (labelled events only): the
    // rate's error is at most (highest - lowest) * ||pi_hat - pi||_1 / 2.
    double lowest_intensity = 0, highest_intensity = 0;
    std::optional<double> error_bound; // absent when unknown (or a --rate formula)
};

struct LikelyStateRecord {
    std::uint64_t index = 0; // in the chain file's order
    double probability = 0;
    std::vector<std::pair<std::string, double>> variables; // name, value
};

struct SummaryRecord {
    std::vector<MeasureRecord> measures;
    std::vector<ProbabilityRecord> probabilities;
    std::vector<EventRateRecord> events;
    std::string rate_unit; // "per unit time" or "per step"
    std::vector<LikelyStateRecord> likely_states;
    // ||pi_hat - pi||_1 / 2: no probability is off by more (summary/error_bound.hpp).
    // Absent when the result carries no error estimate (an older longrun).
    std::optional<double> probability_error_bound;
};

} // namespace longrun::io

// Checked ranges for numeric options. A value outside its range is a usage error
// (exit 1) with one sentence naming the option, the value as typed and the range,
// e.g. "--row-sum-tol: 0 is not a number in (0, 0.1]"; CLI11 puts the option's
// name in front. The check reads the text as typed, so that a huge or malformed
// value is never echoed as a 300-digit number, and refuses nan and infinities.
#pragma once

#include <CLI/CLI.hpp>

#include <cstdint>
#include <limits>

namespace longrun::cli {

// An interval of real numbers; an infinite end means "no bound on that side"
// (the value must still be finite).
struct Interval {
    double low = -std::numeric_limits<double>::infinity();
    double high = std::numeric_limits<double>::infinity();
    bool low_included = true;
    bool high_included = true;

    static constexpr Interval closed(double low, double high) { return {low, high, true, true}; }
    static constexpr Interval open(double low, double high) { return {low, high, false, false}; }
    static constexpr Interval open_closed(double low, double high) {
        return {low, high, false, true};
    }
    static constexpr Interval closed_open(double low, double high) {
        return {low, high, true, false};
    }
    static constexpr Interval at_least(double low) {
        return {low, std::numeric_limits<double>::infinity(), true, false};
    }
    static constexpr Interval above(double low) {
        return {low, std::numeric_limits<double>::infinity(), false, false};
    }

    bool contains(double x) const noexcept;
    // "(0, 0.1]", "> 0", ">= 0"
    std::string describe() const;
};

// Intervals in seconds (between checkpoints, before compare starts no more runs):
// 10^7 s is 116 days, longer than any batch allocation.
inline constexpr double longest_seconds = 1e7;

// A finite number in `range`, e.g. ->check(number_in(Interval::open_closed(0, 1e-2))).
CLI::Validator number_in(Interval range);

// A whole number (decimal digits only) in [low, high].
CLI::Validator whole_number_in(std::uint64_t low,
                               std::uint64_t high = std::numeric_limits<std::uint64_t>::max());

// The sentence's tail, for checks made after parsing: "0 is not a number in (0, 0.1]"
// ("" when `text` is a number in range).
std::string number_in_range_problem(const std::string& text, const Interval& range);

} // namespace longrun::cli

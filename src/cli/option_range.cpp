#include "option_range.hpp"

#include <fmt/format.h>

#include <charconv>
#include <cmath>

namespace longrun::cli {

namespace {

// Echo what was typed, but keep the line short.
std::string as_typed(const std::string& text) {
    constexpr std::size_t longest = 40;
    if (text.empty())
        return "''";
    if (text.size() <= longest)
        return text;
    return text.substr(0, longest) + "...";
}

std::string bound(double x) {
    return fmt::format("{}", x);
}

} // namespace

bool Interval::contains(double x) const noexcept {
    if (!std::isfinite(x))
        return false;
    const bool above_low = low_included ? x >= low : x > low;
    const bool below_high = high_included ? x <= high : x < high;
    return above_low && below_high;
}

std::string Interval::describe() const {
    if (std::isinf(high) && std::isinf(low))
        return "";
    if (std::isinf(high))
        return fmt::format("{} {}", low_included ? ">=" : ">", bound(low));
    if (std::isinf(low))
        return fmt::format("{} {}", high_included ? "<=" : "<", bound(high));
    return fmt::format("{}{}, {}{}", low_included ? '[' : '(', bound(low), bound(high),
                       high_included ? ']' : ')');
}

std::string number_in_range_problem(const std::string& text, const Interval& range) {
    double x = 0;
    const char* end = text.data() + text.size();
    const auto [stop, error] = std::from_chars(text.data(), end, x);
    if (error == std::errc() && stop == end && range.contains(x))
        return "";
    const std::string where = range.describe();
    if (where.empty())
        return fmt::format("{} is not a finite number", as_typed(text));
    const bool one_sided = where.front() == '<' || where.front() == '>';
    return fmt::format("{} is not a number {}{}", as_typed(text), one_sided ? "" : "in ", where);
}

CLI::Validator number_in(Interval range) {
    return CLI::Validator(
        [range](std::string& text) { return number_in_range_problem(text, range); },
        range.describe());
}

CLI::Validator whole_number_in(std::uint64_t low, std::uint64_t high) {
    const std::string range = high == std::numeric_limits<std::uint64_t>::max()
                                  ? fmt::format(">= {}", low)
                                  : fmt::format("[{}, {}]", low, high);
    const std::string where = range.front() == '[' ? "in " + range : range;
    return CLI::Validator(
        [low, high, where](std::string& text) -> std::string {
            std::uint64_t x = 0;
            const char* end = text.data() + text.size();
            const auto [stop, error] = std::from_chars(text.data(), end, x);
            if (!text.empty() && error == std::errc() && stop == end && x >= low && x <= high)
                return "";
            return fmt::format("{} is not a whole number {}", as_typed(text), where);
        },
        range);
}

} // namespace longrun::cli

#include "error_bound.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>

namespace longrun::summary {

std::optional<double> tol_to_resolve(double p) {
    if (!(p > 0) || !std::isfinite(p))
        return std::nullopt;
    const double target = p / 10;
    double tol = std::pow(10.0, std::floor(std::log10(target)));
    // log10 of an exact power of ten may land just below the integer.
    if (tol * 10 <= target * (1 + 1e-12))
        tol *= 10;
    if (tol > target * (1 + 1e-12))
        tol /= 10;
    return std::min(tol, 1e-2);
}

bool probability_resolved(double p, double probability_bound) {
    return std::isfinite(probability_bound) && p >= 2 * probability_bound;
}

bool quantile_resolved(const io::QuantileRecord& q, double probability_bound) {
    if (!std::isfinite(probability_bound))
        return false;
    const double beyond = 1 - q.level;
    return q.tail_at - beyond > probability_bound && beyond - q.tail_above > probability_bound;
}

void apply_error_bound(io::SummaryRecord& s, std::optional<double> error_estimate) {
    if (!error_estimate)
        return;
    const double bound = *error_estimate / 2;
    s.probability_error_bound = bound;
    for (auto& m : s.measures) {
        m.mean_error_bound = (m.highest - m.lowest) * bound;
        for (auto& q : m.quantiles)
            q.resolved = quantile_resolved(q, bound);
    }
    for (auto& e : s.events)
        if (e.source != "--rate")
            e.error_bound = (e.highest_intensity - e.lowest_intensity) * bound;
}

std::string unresolved_mark(double p, std::optional<double> probability_bound) {
    if (!probability_bound || probability_resolved(p, *probability_bound))
        return "";
    const auto tol = tol_to_resolve(p);
    return tol ? fmt::format(" (unresolved: --tol {:.0e})", *tol) : " (unresolved)";
}

std::size_t first_unresolved_tail(const io::MeasureRecord& m, double probability_bound) {
    for (std::size_t i = 0; i < m.values.size() && i < m.tail.size(); ++i)
        if (!probability_resolved(m.tail[i], probability_bound))
            return i;
    return m.values.size();
}

} // namespace longrun::summary

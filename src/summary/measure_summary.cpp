#include "measure_summary.hpp"

#include "io/error.hpp"
#include "io/mpi_gather.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <stdexcept>
#include <utility>

namespace longrun::summary {

namespace {

struct Distribution {
    std::vector<double> values, pmf, tail; // distinct values, increasing
};

// Every rank first merges its own states into distinct values (a queue length
// has far fewer values than states), then all ranks exchange those.
Distribution gather_distribution(MPI_Comm comm, std::span<const double> values,
                                 std::span<const double> pi) {
    std::vector<std::pair<double, double>> local(values.size());
    for (std::size_t i = 0; i < values.size(); ++i)
        local[i] = {values[i], pi[i]};
    std::sort(local.begin(), local.end(),
              [](const auto& a, const auto& b) { return a.first < b.first; });
    std::vector<double> flat;
    for (const auto& [v, p] : local) {
        if (!flat.empty() && flat[flat.size() - 2] == v)
            flat.back() += p;
        else {
            flat.push_back(v);
            flat.push_back(p);
        }
    }

    const std::vector<double> all = gather_to_all<double>(comm, flat);

    std::vector<std::pair<double, double>> pairs(all.size() / 2);
    for (std::size_t i = 0; i < pairs.size(); ++i)
        pairs[i] = {all[2 * i], all[2 * i + 1]};
    // Stable on equal values, so that every rank adds the same masses in the same
    // order and gets bit-identical results.
    std::stable_sort(pairs.begin(), pairs.end(),
                     [](const auto& a, const auto& b) { return a.first < b.first; });
    Distribution d;
    for (const auto& [v, p] : pairs) {
        if (!d.values.empty() && d.values.back() == v)
            d.pmf.back() += p;
        else {
            d.values.push_back(v);
            d.pmf.push_back(p);
        }
    }
    // Summed from the top so that tiny tail masses keep their relative accuracy.
    d.tail.assign(d.values.size(), 0.0);
    double running = 0;
    for (std::size_t i = d.values.size(); i-- > 0;) {
        running += d.pmf[i];
        d.tail[i] = running;
    }
    return d;
}

// Smallest v with P(X <= v) >= level. P(X <= v_i) = 1 - P(X >= v_{i+1}); the
// comparison stays on the tail side because 1 - 1e-12 has lost most digits.
double quantile(const Distribution& d, double level) {
    for (std::size_t i = 0; i < d.values.size(); ++i) {
        const double above = i + 1 < d.values.size() ? d.tail[i + 1] : 0.0;
        if (above <= 1.0 - level + 1e-15)
            return d.values[i];
    }
    return d.values.empty() ? 0.0 : d.values.back();
}

bool is_integer(double v) {
    return std::isfinite(v) && std::floor(v) == v;
}

} // namespace

io::MeasureRecord summarize_measure(MPI_Comm comm, const std::string& name,
                                    const std::string& origin, std::span<const double> values,
                                    std::span<const double> pi, std::span<const double> levels,
                                    const std::vector<Condition>& given, std::size_t max_points) {
    for (double level : levels)
        if (!(level > 0 && level < 1))
            throw UsageError(
                fmt::format("quantile level {} of '{}' is not in (0, 1)", level, name));

    // Local faults are agreed on first, so that no rank leaves the others waiting.
    double faults[3] = {0, 0, 0}; // non-finite values, length mismatches, non-integers
    bool lengths_match = values.size() == pi.size();
    for (const auto& c : given)
        lengths_match = lengths_match && c.holds.size() == pi.size();
    faults[1] = lengths_match ? 0 : 1;
    for (double v : values) {
        if (!std::isfinite(v))
            ++faults[0];
        if (!is_integer(v))
            ++faults[2];
    }
    MPI_Allreduce(MPI_IN_PLACE, faults, 3, MPI_DOUBLE, MPI_SUM, comm);
    if (faults[1] > 0)
        throw std::logic_error("summarize_measure: values, pi and conditions differ in length");
    if (faults[0] > 0)
        throw UsageError(
            fmt::format("{} ({}) is not a finite number in {} states", name, origin, faults[0]));

    const Distribution d = gather_distribution(comm, values, pi);

    io::MeasureRecord r;
    r.name = name;
    r.origin = origin;
    r.integral = faults[2] == 0;
    double mean = 0;
    for (std::size_t i = 0; i < d.values.size(); ++i)
        mean += d.values[i] * d.pmf[i];
    double var = 0;
    for (std::size_t i = 0; i < d.values.size(); ++i)
        var += (d.values[i] - mean) * (d.values[i] - mean) * d.pmf[i];
    r.mean = mean;
    r.std = std::sqrt(std::max(var, 0.0));
    if (!d.values.empty()) {
        r.lowest = d.values.front();
        r.highest = d.values.back();
    }
    for (double level : levels) {
        io::QuantileRecord q{level, quantile(d, level)};
        const auto at = std::lower_bound(d.values.begin(), d.values.end(), q.value);
        if (at != d.values.end()) {
            const auto i = static_cast<std::size_t>(at - d.values.begin());
            q.tail_at = d.tail[i];
            q.tail_above = i + 1 < d.tail.size() ? d.tail[i + 1] : 0.0;
        }
        r.quantiles.push_back(q);
    }

    const std::size_t bins = std::max<std::size_t>(max_points, 1);
    if (d.values.size() <= bins) {
        r.values = d.values;
        r.pmf = d.pmf;
        r.tail = d.tail;
    } else {
        // Bin b holds distinct values [b D / bins, (b + 1) D / bins): the tail at
        // each bin's lowest value stays exact.
        r.binned = true;
        const std::size_t distinct = d.values.size();
        for (std::size_t b = 0; b < bins; ++b) {
            const std::size_t first = b * distinct / bins, last = (b + 1) * distinct / bins;
            double mass = 0;
            for (std::size_t i = first; i < last; ++i)
                mass += d.pmf[i];
            r.values.push_back(d.values[first]);
            r.pmf.push_back(mass);
            r.tail.push_back(d.tail[first]);
        }
    }

    // One reduction for all conditions: P(condition) and E[X; condition].
    std::vector<double> sums(2 * given.size(), 0.0);
    for (std::size_t c = 0; c < given.size(); ++c)
        for (std::size_t i = 0; i < pi.size(); ++i)
            if (given[c].holds[i] != 0) {
                sums[2 * c] += pi[i];
                sums[2 * c + 1] += pi[i] * values[i];
            }
    MPI_Allreduce(MPI_IN_PLACE, sums.data(), static_cast<int>(sums.size()), MPI_DOUBLE, MPI_SUM,
                  comm);
    for (std::size_t c = 0; c < given.size(); ++c) {
        io::ConditionalRecord g;
        g.condition = given[c].text;
        g.probability = sums[2 * c];
        if (sums[2 * c] > 0)
            g.mean = sums[2 * c + 1] / sums[2 * c];
        r.given.push_back(std::move(g));
    }
    return r;
}

void add_bound_masses(MPI_Comm comm, io::MeasureRecord& record, std::span<const double> values,
                      std::span<const double> pi, std::optional<double> lower,
                      std::optional<double> upper) {
    double mass[2] = {0, 0};
    for (std::size_t i = 0; i < std::min(values.size(), pi.size()); ++i) {
        if (lower && values[i] == *lower)
            mass[0] += pi[i];
        if (upper && values[i] == *upper)
            mass[1] += pi[i];
    }
    MPI_Allreduce(MPI_IN_PLACE, mass, 2, MPI_DOUBLE, MPI_SUM, comm);
    record.lower_bound = lower;
    record.upper_bound = upper;
    record.mass_at_lower = lower ? std::optional<double>(mass[0]) : std::nullopt;
    record.mass_at_upper = upper ? std::optional<double>(mass[1]) : std::nullopt;
}

double probability_of(MPI_Comm comm, std::span<const double> holds, std::span<const double> pi) {
    double p = 0;
    for (std::size_t i = 0; i < std::min(holds.size(), pi.size()); ++i)
        if (holds[i] != 0)
            p += pi[i];
    MPI_Allreduce(MPI_IN_PLACE, &p, 1, MPI_DOUBLE, MPI_SUM, comm);
    return p;
}

} // namespace longrun::summary

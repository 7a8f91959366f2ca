#include "event_rates.hpp"

#include "expression_error.hpp"
#include "io/error.hpp"
#include "model/expression.hpp"
#include "model/model.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>

namespace longrun::summary {

namespace {

std::string trimmed(const std::string& s) {
    const auto first = s.find_first_not_of(" \t");
    if (first == std::string::npos)
        return "";
    const auto last = s.find_last_not_of(" \t");
    return s.substr(first, last - first + 1);
}

bool has_name(const std::vector<io::EventRateRecord>& rates, const std::string& name) {
    return std::any_of(rates.begin(), rates.end(), [&](const auto& r) { return r.name == name; });
}

} // namespace

std::string rate_unit(io::ChainKind kind) {
    return kind == io::ChainKind::ctmc ? "per unit time" : "per step";
}

std::vector<io::EventRateRecord> event_rates(MPI_Comm comm, const io::Chain& chain,
                                             std::span<const double> pi) {
    const std::size_t rows = std::min<std::size_t>(chain.local_rows(), pi.size());
    // Intensities first: they also count firings that change nothing. Labels add
    // the names the intensities do not cover (e.g. "several" for merged transitions).
    const std::size_t named = chain.event_intensities.size();
    // Decided from the names, which every rank has: a rank without rows has no
    // labels either, yet must reduce the same vector as the others.
    const bool labelled = !chain.event_names.empty();
    const std::size_t count = named + (labelled ? chain.event_names.size() : 0);
    std::vector<double> sums(count, 0.0);
    // The range of one state's intensity bounds the rate's error for a given
    // error of pi (a rate is a mean of the intensity).
    std::vector<double> highest(count, 0.0), lowest(count, INFINITY);
    for (std::size_t e = 0; e < named; ++e) {
        const auto& intensity = chain.event_intensities[e].values;
        for (std::size_t i = 0; i < std::min(rows, intensity.size()); ++i) {
            sums[e] += pi[i] * intensity[i];
            highest[e] = std::max(highest[e], intensity[i]);
            lowest[e] = std::min(lowest[e], intensity[i]);
        }
    }
    if (labelled) {
        std::vector<double> row_intensity(chain.event_names.size());
        for (std::size_t i = 0; i < rows; ++i) {
            std::fill(row_intensity.begin(), row_intensity.end(), 0.0);
            for (auto k = chain.offsets[i]; k < chain.offsets[i + 1]; ++k)
                if (k < chain.events.size() && chain.events[k] < chain.event_names.size())
                    row_intensity[chain.events[k]] += chain.weights[k];
            for (std::size_t l = 0; l < row_intensity.size(); ++l) {
                sums[named + l] += pi[i] * row_intensity[l];
                highest[named + l] = std::max(highest[named + l], row_intensity[l]);
                lowest[named + l] = std::min(lowest[named + l], row_intensity[l]);
            }
        }
    }
    const int n = static_cast<int>(count);
    MPI_Allreduce(MPI_IN_PLACE, sums.data(), n, MPI_DOUBLE, MPI_SUM, comm);
    MPI_Allreduce(MPI_IN_PLACE, highest.data(), n, MPI_DOUBLE, MPI_MAX, comm);
    MPI_Allreduce(MPI_IN_PLACE, lowest.data(), n, MPI_DOUBLE, MPI_MIN, comm);

    auto record = [&](const std::string& name, std::size_t e, const char* source) {
        io::EventRateRecord r;
        r.name = name;
        r.rate = sums[e];
        r.source = source;
        r.highest_intensity = highest[e];
        r.lowest_intensity = std::isfinite(lowest[e]) ? std::min(lowest[e], highest[e]) : 0.0;
        return r;
    };
    std::vector<io::EventRateRecord> out;
    for (std::size_t e = 0; e < named; ++e)
        out.push_back(record(chain.event_intensities[e].name, e, "event intensities"));
    for (std::size_t l = 0; labelled && l < chain.event_names.size(); ++l) {
        // Transitions merged from several events carry no single name; with
        // intensities every event is already counted on its own.
        if (named > 0 && chain.event_names[l] == model::several_events_label)
            continue;
        if (!has_name(out, chain.event_names[l]))
            out.push_back(record(chain.event_names[l], named + l, "transition labels"));
    }
    return out;
}

io::EventRateRecord derived_rate(const std::string& definition,
                                 const std::vector<io::EventRateRecord>& rates) {
    const std::string role = "--rate " + definition;
    const auto eq = definition.find('=');
    const bool is_definition =
        eq != std::string::npos && (eq + 1 >= definition.size() || definition[eq + 1] != '=');
    const std::string name = is_definition ? trimmed(definition.substr(0, eq)) : "";
    if (!model::is_identifier(name))
        throw UsageError(fmt::format(
            "{}: expected name=expression over event names, e.g. lost_fraction=drop/(drop+admit)",
            role));
    if (has_name(rates, name))
        throw UsageError(fmt::format("{}: '{}' already names an event", role, name));
    const std::string expression = trimmed(definition.substr(eq + 1));

    model::Scope scope;
    for (const auto& r : rates)
        if (model::is_identifier(r.name) && !model::is_reserved_name(r.name))
            scope.constants.emplace_back(r.name, r.rate);
    io::EventRateRecord out;
    out.name = name;
    out.expression = expression;
    out.source = "--rate";
    try {
        out.rate = model::Expression(model::Text{expression, {}}, scope, role)();
    } catch (const InputError& e) {
        std::vector<std::string> known;
        for (const auto& [n, v] : scope.constants)
            known.push_back(n);
        throw expression_usage_error(e, known, "event names");
    }
    return out;
}

} // namespace longrun::summary

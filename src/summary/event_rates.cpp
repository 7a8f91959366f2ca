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
    std::vector<double> sums(named + (labelled ? chain.event_names.size() : 0), 0.0);
    for (std::size_t e = 0; e < named; ++e) {
        const auto& intensity = chain.event_intensities[e].values;
        for (std::size_t i = 0; i < std::min(rows, intensity.size()); ++i)
            sums[e] += pi[i] * intensity[i];
    }
    if (labelled)
        for (std::size_t i = 0; i < rows; ++i)
            for (auto k = chain.offsets[i]; k < chain.offsets[i + 1]; ++k)
                if (k < chain.events.size() && chain.events[k] < chain.event_names.size())
                    sums[named + chain.events[k]] += pi[i] * chain.weights[k];
    MPI_Allreduce(MPI_IN_PLACE, sums.data(), static_cast<int>(sums.size()), MPI_DOUBLE, MPI_SUM,
                  comm);

    std::vector<io::EventRateRecord> out;
    for (std::size_t e = 0; e < named; ++e)
        out.push_back({chain.event_intensities[e].name, "", sums[e], "event intensities"});
    for (std::size_t l = 0; labelled && l < chain.event_names.size(); ++l) {
        // Transitions merged from several events carry no single name; with
        // intensities every event is already counted on its own.
        if (named > 0 && chain.event_names[l] == model::several_events_label)
            continue;
        if (!has_name(out, chain.event_names[l]))
            out.push_back({chain.event_names[l], "", sums[named + l], "transition labels"});
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
    io::EventRateRecord out{name, expression, 0.0, "--rate"};
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

#include "summary_output.hpp"

#include "summary/error_bound.hpp"

#include <fmt/format.h>
#include <fmt/ranges.h>

#include <cmath>

namespace longrun::cli {

namespace {

std::string value_text(double v, bool integral) {
    if (integral && std::abs(v) < 1e15)
        return fmt::format("{}", static_cast<long long>(v));
    return fmt::format("{:.6g}", v);
}

std::string percent(double level) {
    return fmt::format("{:g}%", level * 100);
}

// Where the tail first drops below 1e-1, 1e-2, ...: the few thresholds worth a look.
// The tail column is the last one, so a mark there keeps the table aligned.
std::string tail_text(const io::MeasureRecord& m, std::optional<double> probability_bound) {
    std::string out;
    double last = std::nan("");
    for (double level : {1e-1, 1e-2, 1e-3, 1e-6, 1e-9})
        for (std::size_t i = 0; i < m.values.size(); ++i)
            if (m.tail[i] <= level) {
                if (m.values[i] != last)
                    out += fmt::format("  P(>={})={:.2e}{}", value_text(m.values[i], m.integral),
                                       m.tail[i],
                                       summary::unresolved_mark(m.tail[i], probability_bound));
                last = m.values[i];
                break;
            }
    return out;
}

// A quantile the error bound could move gets a '?'.
std::string quantile_cell(const io::QuantileRecord& q, bool integral) {
    return value_text(q.value, integral) + (q.resolved.value_or(true) ? "" : "?");
}

nlohmann::json number_or_null(std::optional<double> v) {
    return v && std::isfinite(*v) ? nlohmann::json(*v) : nlohmann::json(nullptr);
}

// null when the result carries no error estimate.
nlohmann::json resolved_json(double p, std::optional<double> bound) {
    return bound ? nlohmann::json(summary::probability_resolved(p, *bound))
                 : nlohmann::json(nullptr);
}

nlohmann::json tol_json(double p, std::optional<double> bound) {
    if (!bound || summary::probability_resolved(p, *bound))
        return nullptr;
    return number_or_null(summary::tol_to_resolve(p));
}

std::string certificate_text(const SolveRecord& s) {
    const std::string residual =
        fmt::format("{} = {:.2e}",
                    s.residual_definition.empty() ? "residual" : s.residual_definition, s.residual);
    const std::string how = fmt::format("({}, {} iterations)", s.method, s.iterations);
    if (!s.error_estimate)
        return fmt::format("certificate  {} {}; error not estimated (result from an older "
                           "longrun): nothing below is marked\n",
                           residual, how);
    if (!std::isfinite(*s.error_estimate))
        return fmt::format("certificate  {} {}; error not estimated by this solve: no "
                           "probability below is resolved\n",
                           residual, how);
    return fmt::format("certificate  estimated error ||pi_hat - pi||_1 = {:.2e} (--tol {:.1e}) {}\n"
                       "             any probability below is within {:.1e} of the exact one; "
                       "{}\n",
                       *s.error_estimate, s.tolerance, how, *s.error_estimate / 2, residual);
}

} // namespace

std::string unresolved_footnote(const std::optional<double>& probability_bound) {
    if (!probability_bound)
        return "";
    return fmt::format("unresolved: below {:.1e}, twice the bound, so even the first digit may "
                       "be wrong; solve again with the --tol shown. '?': a quantile the bound "
                       "could move.\n",
                       2 * *probability_bound);
}

std::string quantile_label(double level) {
    return fmt::format("q{:g}", level);
}

std::string summary_text(const SummaryReport& r) {
    std::string t;
    t += fmt::format("result       {}\n", r.result_path);
    t += fmt::format("chain        {}: {}, {} states, {} transitions\n", r.chain_path, r.kind,
                     r.states, r.transitions);
    if (!r.parameters.empty()) {
        std::vector<std::string> ps;
        for (const auto& [name, value] : r.parameters)
            ps.push_back(fmt::format("{}={:g}", name, value));
        t += fmt::format("parameters   {}\n", fmt::join(ps, ", "));
    }
    t += certificate_text(r.solve);
    const auto bound = r.summary.probability_error_bound;

    const auto& measures = r.summary.measures;
    std::size_t width = 14; // the longest name, so that the columns line up
    for (const auto& m : measures)
        width = std::max(width, m.name.size());
    for (const auto& e : r.summary.events)
        width = std::max(width, e.name.size());
    if (!measures.empty()) {
        t += fmt::format("\n{:<{}} {:>12} {:>12}", "measure", width, "mean", "std");
        for (double level : r.default_levels)
            t += fmt::format(" {:>9}", percent(level));
        t += "   tail mass\n";
        for (const auto& m : measures) {
            t += fmt::format("{:<{}} {:>12.6g} {:>12.6g}", m.name, width, m.mean, m.std);
            for (double level : r.default_levels) {
                std::string cell = "-";
                for (const auto& q : m.quantiles)
                    if (q.level == level)
                        cell = quantile_cell(q, m.integral);
                t += fmt::format(" {:>9}", cell);
            }
            t += tail_text(m, bound) + "\n";
        }
        // Levels asked for beyond the standard ones, and conditional means.
        for (const auto& m : measures) {
            for (const auto& q : m.quantiles)
                if (std::find(r.default_levels.begin(), r.default_levels.end(), q.level) ==
                    r.default_levels.end())
                    t += fmt::format("  {} quantile {}: {}\n", m.name, percent(q.level),
                                     quantile_cell(q, m.integral));
            for (const auto& g : m.given)
                t += g.mean ? fmt::format("  E[{} | {}] = {:.6g}   (P({}) = {:.4g})\n", m.name,
                                          g.condition, *g.mean, g.condition, g.probability)
                            : fmt::format("  E[{} | {}] undefined: P({}) = 0\n", m.name,
                                          g.condition, g.condition);
        }
    }
    if (!r.summary.probabilities.empty()) {
        t += "\nprobability\n";
        for (const auto& p : r.summary.probabilities)
            t += (p.name == p.condition ? fmt::format("  P({}) = {:.6e}", p.name, p.probability)
                                        : fmt::format("  P({}) = P({}) = {:.6e}", p.name,
                                                      p.condition, p.probability)) +
                 summary::unresolved_mark(p.probability, bound) + "\n";
    }
    if (!r.summary.events.empty()) {
        t += fmt::format("\nevent rates ({})\n", r.summary.rate_unit);
        for (const auto& e : r.summary.events)
            t += e.expression.empty()
                     ? fmt::format("  {:<{}} {:.6e}{}\n", e.name, width, e.rate,
                                   e.error_bound ? fmt::format("   +- {:.1e}", *e.error_bound)
                                                 : std::string())
                     : fmt::format("  {:<{}} {:.6e}   = {}\n", e.name, width, e.rate, e.expression);
    }
    if (!r.summary.likely_states.empty()) {
        t += fmt::format("\nmost likely states\n");
        for (const auto& s : r.summary.likely_states) {
            std::vector<std::string> vars;
            for (const auto& [name, value] : s.variables)
                vars.push_back(fmt::format("{}={:g}", name, value));
            t +=
                fmt::format("  {:>12}  {:.6e}  {}\n", s.index, s.probability, fmt::join(vars, " "));
        }
    }
    if (bound && t.find("unresolved") != std::string::npos)
        t += fmt::format("\n{}", unresolved_footnote(bound));
    for (const auto& w : r.warnings)
        t += fmt::format("\nwarning: {}\n", w);
    t += fmt::format("\n{}\n", safety_caution);
    return t;
}

nlohmann::json summary_json(const SummaryReport& r) {
    nlohmann::json j;
    j["result"] = r.result_path;
    j["chain"] = {{"path", r.chain_path},
                  {"kind", r.kind},
                  {"states", r.states},
                  {"transitions", r.transitions}};
    nlohmann::json params = nlohmann::json::object();
    for (const auto& [name, value] : r.parameters)
        params[name] = value;
    j["parameters"] = params;
    j["certificate"] = {{"method", r.solve.method},
                        {"residual", r.solve.residual},
                        {"tolerance", r.solve.tolerance},
                        {"residual_definition", r.solve.residual_definition},
                        {"converged", r.solve.converged},
                        {"iterations", r.solve.iterations},
                        {"error_estimate", number_or_null(r.solve.error_estimate)},
                        {"error_estimate_method",
                         r.solve.error_estimate ? nlohmann::json(r.solve.error_estimate_method)
                                                : nlohmann::json(nullptr)}};
    const auto bound = r.summary.probability_error_bound;
    // null: the result comes from an older longrun, which estimated no error.
    j["probability_error_bound"] = number_or_null(bound);
    nlohmann::json measures = nlohmann::json::array();
    for (const auto& m : r.summary.measures) {
        nlohmann::json q = nlohmann::json::object(), q_resolved = nlohmann::json::object();
        for (const auto& x : m.quantiles) {
            q[fmt::format("{:g}", x.level)] = x.value;
            q_resolved[fmt::format("{:g}", x.level)] =
                x.resolved ? nlohmann::json(*x.resolved) : nlohmann::json(nullptr);
        }
        nlohmann::json given = nlohmann::json::array();
        for (const auto& g : m.given)
            given.push_back({{"condition", g.condition},
                             {"probability", g.probability},
                             {"mean", g.mean ? nlohmann::json(*g.mean) : nlohmann::json(nullptr)}});
        nlohmann::json tail = nlohmann::json::array();
        for (std::size_t i = 0; i < m.values.size(); ++i)
            tail.push_back({m.values[i], m.pmf[i], m.tail[i]});
        nlohmann::json mj = {{"name", m.name},     {"origin", m.origin},  {"mean", m.mean},
                             {"std", m.std},       {"quantiles", q},      {"given", given},
                             {"binned", m.binned}, {"distribution", tail}};
        mj["error_bound"] = number_or_null(m.mean_error_bound);
        mj["quantiles_resolved"] = q_resolved;
        // Tails fall with the value: from the first unresolved one on, none is.
        mj["unresolved_tail"] = nullptr;
        if (bound) {
            const auto i = summary::first_unresolved_tail(m, *bound);
            if (i < m.values.size())
                mj["unresolved_tail"] = {{"at_least", m.values[i]},
                                         {"probability", m.tail[i]},
                                         {"tol_to_resolve", tol_json(m.tail[i], bound)}};
        }
        if (m.mass_at_upper)
            mj["mass_at_upper_bound"] = *m.mass_at_upper;
        if (m.mass_at_lower)
            mj["mass_at_lower_bound"] = *m.mass_at_lower;
        measures.push_back(mj);
    }
    j["measures"] = measures;
    nlohmann::json probabilities = nlohmann::json::array();
    for (const auto& p : r.summary.probabilities)
        probabilities.push_back({{"name", p.name},
                                 {"condition", p.condition},
                                 {"probability", p.probability},
                                 {"error_bound", number_or_null(bound)},
                                 {"resolved", resolved_json(p.probability, bound)},
                                 {"tol_to_resolve", tol_json(p.probability, bound)}});
    j["probabilities"] = probabilities;
    nlohmann::json events = nlohmann::json::array();
    for (const auto& e : r.summary.events)
        events.push_back({{"name", e.name},
                          {"rate", e.rate},
                          {"error_bound", number_or_null(e.error_bound)},
                          {"resolved", e.error_bound ? nlohmann::json(e.rate >= 2 * *e.error_bound)
                                                     : nlohmann::json(nullptr)},
                          {"source", e.source},
                          {"expression", e.expression}});
    j["event_rates"] = {{"unit", r.summary.rate_unit}, {"events", events}};
    nlohmann::json likely = nlohmann::json::array();
    for (const auto& s : r.summary.likely_states) {
        nlohmann::json vars = nlohmann::json::object();
        for (const auto& [name, value] : s.variables)
            vars[name] = value;
        likely.push_back({{"index", s.index}, {"probability", s.probability}, {"variables", vars}});
    }
    j["likely_states"] = likely;
    j["warnings"] = r.warnings;
    j["caution"] = safety_caution;
    return j;
}

std::string summary_csv(const SummaryReport& r) {
    // Names may hold commas (a --tail condition): quote every text field.
    auto quoted = [](const std::string& s) {
        std::string out = "\"";
        for (char c : s)
            out += c == '"' ? std::string("\"\"") : std::string(1, c);
        return out + "\"";
    };
    // error_bound and resolved stay empty where no bound is known (an older
    // result, a std, a conditional mean, a --rate formula).
    std::string t = "kind,name,statistic,value,error_bound,resolved\n";
    auto row = [&](const char* kind, const std::string& name, const std::string& stat, double v,
                   std::optional<double> error_bound = std::nullopt,
                   std::optional<bool> resolved = std::nullopt) {
        t += fmt::format("{},{},{},{:.17g},{},{}\n", kind, quoted(name), quoted(stat), v,
                         error_bound ? fmt::format("{:.17g}", *error_bound) : std::string(),
                         resolved ? (*resolved ? "true" : "false") : "");
    };
    const auto bound = r.summary.probability_error_bound;
    auto probability_row = [&](const char* kind, const std::string& name, const std::string& stat,
                               double p) {
        row(kind, name, stat, p, bound,
            bound ? std::optional<bool>(summary::probability_resolved(p, *bound)) : std::nullopt);
    };
    for (const auto& m : r.summary.measures) {
        row("measure", m.name, "mean", m.mean, m.mean_error_bound);
        row("measure", m.name, "std", m.std);
        for (const auto& q : m.quantiles)
            row("measure", m.name, quantile_label(q.level), q.value, std::nullopt, q.resolved);
        for (const auto& g : m.given) {
            probability_row("measure", m.name, "P(" + g.condition + ")", g.probability);
            if (g.mean)
                row("measure", m.name, "mean|" + g.condition, *g.mean);
        }
    }
    for (const auto& p : r.summary.probabilities)
        probability_row("probability", p.name, "P", p.probability);
    for (const auto& e : r.summary.events)
        row("event", e.name, "rate", e.rate, e.error_bound,
            e.error_bound ? std::optional<bool>(e.rate >= 2 * *e.error_bound) : std::nullopt);
    return t;
}

} // namespace longrun::cli

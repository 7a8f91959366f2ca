#include "report.hpp"

#include "summary/error_bound.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>

namespace longrun::cli {

namespace {

nlohmann::json finite_or_null(double v) {
    return std::isfinite(v) ? nlohmann::json(v) : nlohmann::json(nullptr);
}

std::string number(double v, bool integral) {
    if (integral && std::abs(v) < 1e15)
        return fmt::format("{}", static_cast<long long>(std::llround(v)));
    return fmt::format("{:.6g}", v);
}

std::string bytes(std::uint64_t b) {
    const double mib = static_cast<double>(b) / (1024.0 * 1024.0);
    return mib >= 1024 ? fmt::format("{:.2f} GiB", mib / 1024) : fmt::format("{:.0f} MiB", mib);
}

nlohmann::json quality_json(const std::optional<partition::Quality>& q) {
    if (!q)
        return nullptr;
    return {{"edge_cut", q->edge_cut},     {"volume", q->volume},
            {"max_volume", q->max_volume}, {"off_rank_nonzeros", q->off_rank_nonzeros},
            {"imbalance", q->imbalance},   {"max_nonzeros", q->max_nonzeros}};
}

nlohmann::json partition_json(const PartitionOutcome& p) {
    return {{"requested", partition::to_string(p.requested)},
            {"used", partition::to_string(p.used)},
            {"reason", p.reason},
            {"seconds", p.seconds},
            {"measure_seconds", p.measure_seconds},
            {"contiguous", quality_json(p.contiguous)},
            {"graph", quality_json(p.graph)}};
}

// One line per layout measured; a star marks the one used.
std::string partition_text(const PartitionOutcome& p) {
    std::string t = fmt::format("partition    {} ({}; {:.2f} s)\n", partition::to_string(p.used),
                                p.reason, p.seconds);
    auto line = [&](partition::Layout layout, const std::optional<partition::Quality>& q) {
        if (q)
            t += fmt::format("  {:<11} {} vector entries per product (largest rank {}), edge "
                             "cut {}, imbalance {:.3f}\n",
                             partition::to_string(layout) + (layout == p.used ? "*" : ""),
                             q->volume, q->max_volume, q->edge_cut, q->imbalance);
    };
    line(partition::Layout::contiguous, p.contiguous);
    line(partition::Layout::graph, p.graph);
    return t;
}

// Whether the exact distribution has the same quantile `q` at `level`: the
// tails on either side of q are farther than the bound from 1 - level.
bool quantile_resolved(const summary::Marginal& m, double level, double q, double bound) {
    const auto at = std::lower_bound(m.values.begin(), m.values.end(), q);
    if (at == m.values.end() || *at != q)
        return false;
    const auto i = static_cast<std::size_t>(at - m.values.begin());
    io::QuantileRecord record(level, q);
    record.tail_at = m.tail[i];
    record.tail_above = i + 1 < m.tail.size() ? m.tail[i + 1] : 0.0;
    return summary::quantile_resolved(record, bound);
}

} // namespace

nlohmann::json to_json(const SolveReport& r) {
    nlohmann::json j;
    j["chain"] = {{"path", r.chain_path},
                  {"kind", io::to_string(r.kind)},
                  {"states", r.states},
                  {"transitions", r.transitions}};
    j["ranks"] = r.ranks;
    if (r.structure) {
        nlohmann::json periods = nlohmann::json::array();
        for (const auto& c : r.structure->closed)
            periods.push_back(c.period);
        j["structure"] = {{"strongly_connected_components", r.structure->components},
                          {"closed_classes", r.structure->closed.size()},
                          {"transient_states", r.structure->transient},
                          {"periods", periods},
                          {"verdict", r.structure_verdict}};
    }
    j["validation"] = {{"renormalized_rows", r.validation.renormalized_rows},
                       {"largest_correction", r.validation.largest_correction},
                       {"ctmc_self_loops_ignored", r.validation.ctmc_self_loops},
                       {"explicit_zero_weights", r.validation.explicit_zeros}};
    nlohmann::json attempts = nlohmann::json::array();
    for (const auto& a : r.attempts)
        attempts.push_back({{"method", a.method},
                            {"iterations", a.iterations},
                            {"matvecs", a.matvecs},
                            {"seconds", a.seconds},
                            {"residual", a.residual},
                            {"error_estimate", finite_or_null(a.error_estimate)},
                            {"certified", a.met},
                            {"outcome", a.outcome},
                            {"notes", a.notes}});
    j["attempts"] = attempts;
    j["plan"] = {{"methods", r.plan}, {"reason", r.plan_reason}};
    if (!r.start_from.empty())
        j["start"] = {
            {"how", r.start_from},
            {"residual", r.start_residual ? nlohmann::json(*r.start_residual) : nlohmann::json()}};
    j["checkpoints_written"] = r.checkpoints_written;
    j["certificate"] = {{"method", r.method},
                        {"iterations", r.iterations},
                        {"residual", r.certificate.residual},
                        {"residual_definition", r.residual_definition},
                        {"tolerance", r.tolerance},
                        {"error_estimate", finite_or_null(r.certificate.error_estimate)},
                        {"error_estimate_method", r.certificate.error_estimate_method},
                        {"residual_tolerance", r.residual_tolerance > 0
                                                   ? nlohmann::json(r.residual_tolerance)
                                                   : nlohmann::json(nullptr)},
                        {"certified", r.certified()},
                        {"min_entry", r.certificate.min_entry},
                        {"clipped_mass", r.certificate.clipped_mass},
                        {"norm_error", r.certificate.norm_error}};
    if (!r.classes.empty()) {
        nlohmann::json classes = nlohmann::json::array();
        for (const auto& c : r.classes) {
            nlohmann::json cj = {{"size", c.size},
                                 {"method", c.method},
                                 {"iterations", c.iterations},
                                 {"residual", c.residual},
                                 {"error_estimate", finite_or_null(c.error_estimate)},
                                 {"representatives", c.representatives}};
            if (r.kind == io::ChainKind::dtmc)
                cj["period"] = c.period;
            if (c.probability)
                cj["probability"] = *c.probability;
            classes.push_back(cj);
        }
        j["classes"] = classes;
        if (!r.start_description.empty())
            j["start"] = {{"from", r.start_description},
                          {"absorption_iterations", r.absorption_iterations},
                          {"absorption_relative_residual", r.absorption_residual}};
    }
    if (r.detailed_balance_violation)
        j["reversibility"] = {{"max_relative_violation", *r.detailed_balance_violation},
                              {"reversible", r.reversible},
                              {"verdict", r.reversibility_verdict}};
    j["wall_seconds"] = r.wall_seconds;
    j["phase_seconds"] = nlohmann::json::array();
    for (const auto& [phase, seconds] : r.phase_seconds)
        j["phase_seconds"].push_back({{"phase", phase}, {"seconds", seconds}});
    j["peak_memory_bytes_per_rank"] = r.peak_memory_bytes;
    // Only a distribution with an estimated error bounds its probabilities.
    const double bound = r.certificate.error_estimate / 2;
    const bool bounded = r.has_distribution;
    j["probability_error_bound"] = bounded ? finite_or_null(bound) : nlohmann::json(nullptr);
    nlohmann::json vars = nlohmann::json::array();
    for (const auto& m : r.variables) {
        nlohmann::json tail = nlohmann::json::array();
        for (const auto& [v, p] : summary::informative_tail(m)) {
            nlohmann::json one = {{"at_least", v}, {"probability", p}};
            if (bounded) {
                const bool resolved = summary::probability_resolved(p, bound);
                const auto tol = summary::tol_to_resolve(p);
                one["error_bound"] = finite_or_null(bound);
                one["resolved"] = resolved;
                one["tol_to_resolve"] =
                    resolved || !tol ? nlohmann::json(nullptr) : nlohmann::json(*tol);
            }
            tail.push_back(one);
        }
        vars.push_back(
            {{"name", m.name},
             {"mean", m.mean},
             {"std", m.std},
             {"quantiles", {{"50", m.q50}, {"90", m.q90}, {"99", m.q99}, {"99.9", m.q999}}},
             {"quantiles_resolved",
              bounded ? nlohmann::json{{"50", quantile_resolved(m, 0.5, m.q50, bound)},
                                       {"90", quantile_resolved(m, 0.9, m.q90, bound)},
                                       {"99", quantile_resolved(m, 0.99, m.q99, bound)},
                                       {"99.9", quantile_resolved(m, 0.999, m.q999, bound)}}
                      : nlohmann::json(nullptr)},
             {"tail", tail}});
    }
    j["variables"] = vars;
    nlohmann::json cuts = nlohmann::json::array();
    for (const auto& t : r.truncation)
        cuts.push_back({{"variable", t.variable},
                        {"bound", t.upper ? "upper" : "lower"},
                        {"value", t.bound},
                        {"probability", t.mass},
                        {"warning", t.warn}});
    j["truncation"] = {{"threshold", r.truncation_threshold}, {"bounds", cuts}};
    j["partition"] = partition_json(r.partition);
    j["output"] = r.output ? nlohmann::json(*r.output) : nlohmann::json(nullptr);
    return j;
}

std::string to_text(const SolveReport& r) {
    std::string t;
    t += fmt::format("chain        {}: {}, {} states, {} transitions\n", r.chain_path,
                     io::to_string(r.kind), r.states, r.transitions);
    t += fmt::format("ranks        {}\n", r.ranks);
    if (r.ranks > 1)
        t += partition_text(r.partition);
    if (r.structure)
        t += fmt::format("structure    {}\n", r.structure_verdict);
    std::string tried;
    for (const auto& a : r.attempts)
        tried += (tried.empty() ? "" : ", ") + a.method;
    t += tried.empty() ? fmt::format("method       {}\n", r.method)
                       : fmt::format("method       {} (tried: {})\n", r.method, tried);
    if (!r.plan_reason.empty() && r.plan.size() > 1)
        t += fmt::format("plan         {} ({})\n", fmt::join(r.plan, ", "), r.plan_reason);
    if (!r.start_from.empty())
        t += fmt::format("start        {}\n", r.start_from);
    t += fmt::format("iterations   {}\n", r.iterations);
    if (!r.classes.empty()) {
        t += fmt::format("classes      {} closed classes, each solved on its own{}\n",
                         r.classes.size(),
                         r.start_description.empty() ? "" : "; start: " + r.start_description);
        for (std::size_t k = 0; k < r.classes.size() && k < 20; ++k) {
            const auto& c = r.classes[k];
            t += fmt::format("  class {}: {} state{}{}", k + 1, c.size, c.size == 1 ? "" : "s",
                             c.size == 1 ? " (absorbing)"
                                         : fmt::format(", residual {:.1e}", c.residual));
            if (c.probability)
                t += fmt::format(", probability of ending here {:.6g}", *c.probability);
            t += fmt::format(", e.g. {}\n", c.representatives.front());
        }
        if (r.classes.size() > 20)
            t += fmt::format("  ... and {} more (see --json or the result file)\n",
                             r.classes.size() - 20);
    }
    if (r.has_distribution) {
        const bool on_residual = r.residual_tolerance > 0;
        t += on_residual
                 ? fmt::format("certificate  residual {} = {:.2e} <= {:.1e} (--residual-tol): "
                               "certified{}\n",
                               r.residual_definition, r.certificate.residual, r.residual_tolerance,
                               r.classes.empty() ? "" : " (the mixture, against the whole chain)")
                 : fmt::format("certificate  estimated error ||pi_hat - pi||_1 = {:.2e} <= {:.1e}: "
                               "certified{}\n",
                               r.certificate.error_estimate, r.tolerance,
                               r.classes.empty() ? "" : " (the mixture, against the whole chain)");
        t += on_residual ? fmt::format("             estimated error ||pi_hat - pi||_1 = {:.2e}\n",
                                       r.certificate.error_estimate)
                         : fmt::format("             residual {} = {:.2e}\n", r.residual_definition,
                                       r.certificate.residual);
        t += fmt::format("             estimate: {}\n", r.certificate.error_estimate_method);
        t += fmt::format("             any probability from this distribution is within {:.1e} "
                         "of the exact one\n",
                         r.certificate.error_estimate / 2);
    } else {
        t += fmt::format("certificate  every class within {:.1e} (largest estimated error {:.2e}, "
                         "largest residual {:.2e}); no start given, so no single long-run "
                         "distribution\n",
                         r.tolerance, r.certificate.error_estimate, r.certificate.residual);
    }
    if (r.certificate.clipped_mass > 0)
        t += fmt::format(
            "             {:.2e} of negative rounding mass clipped (min entry {:.2e})\n",
            r.certificate.clipped_mass, r.certificate.min_entry);
    if (r.validation.renormalized_rows > 0)
        t += fmt::format("input        {} row(s) renormalized, largest correction {:.3g}\n",
                         r.validation.renormalized_rows, r.validation.largest_correction);
    if (r.detailed_balance_violation)
        t += fmt::format("reversible   {}\n", r.reversibility_verdict);
    t += fmt::format("time         {:.2f} s wall, peak memory {} (largest rank)\n", r.wall_seconds,
                     bytes(r.peak_memory_bytes));
    if (r.output)
        t += fmt::format("result       {}\n", *r.output);
    if (!r.variables.empty()) {
        const std::optional<double> bound =
            r.has_distribution ? std::optional<double>(r.certificate.error_estimate / 2)
                               : std::nullopt;
        bool marked = false;
        t += fmt::format("\n{:<14} {:>12} {:>12} {:>9} {:>9} {:>9} {:>9}   tail mass\n", "variable",
                         "mean", "std", "50%", "90%", "99%", "99.9%");
        for (const auto& m : r.variables) {
            std::string tail;
            for (const auto& [v, p] : summary::informative_tail(m)) {
                const std::string mark = summary::unresolved_mark(p, bound);
                marked = marked || !mark.empty();
                tail += fmt::format("  P(>={})={:.2e}{}", number(v, m.integral), p, mark);
            }
            // '?': a quantile the error bound could move.
            auto cell = [&](double level, double q) {
                const bool moves = bound && !quantile_resolved(m, level, q, *bound);
                marked = marked || moves;
                return number(q, m.integral) + (moves ? "?" : "");
            };
            t += fmt::format("{:<14} {:>12.6g} {:>12.6g} {:>9} {:>9} {:>9} {:>9} {}\n", m.name,
                             m.mean, m.std, cell(0.5, m.q50), cell(0.9, m.q90), cell(0.99, m.q99),
                             cell(0.999, m.q999), tail);
        }
        if (marked)
            t += fmt::format("unresolved: below {:.1e}, twice the bound, so even the first digit "
                             "may be wrong; solve again with the --tol shown. '?': a quantile "
                             "the bound could move.\n",
                             2 * *bound);
    }
    std::string cuts;
    for (const auto& c : r.truncation)
        if (c.upper || c.warn)
            cuts += fmt::format("{}P({}={})={:.2e}{}", cuts.empty() ? "" : "  ", c.variable,
                                number(c.bound, true), c.mass, c.warn ? " (!)" : "");
    if (!cuts.empty())
        t += fmt::format("\nat bounds    {}   (warning above {:.0e})\n", cuts,
                         r.truncation_threshold);
    return t;
}

} // namespace longrun::cli

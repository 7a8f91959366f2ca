#include "summarize_job.hpp"

#include "load.hpp"

#include "io/chain_hash.hpp"
#include "io/iterate_file.hpp"
#include "io/mpi_agree.hpp"
#include "io/summary_file.hpp"
#include "summary/error_bound.hpp"
#include "summary/event_rates.hpp"
#include "summary/likely_states.hpp"
#include "summary/measure_summary.hpp"
#include "summary/state_table.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <regex>
#include <set>
#include <span>

namespace longrun::cli {

namespace {

namespace fs = std::filesystem;

// The levels every measure gets; --quantile adds more.
const std::vector<double> standard_levels{0.5, 0.9, 0.99, 0.999};

struct Named {
    std::string name, expression;
};

// "name=expression"; `name` must be an identifier and the '=' must not be the
// start of a comparison ("x==3" has no name).
std::optional<Named> split_name(const std::string& text) {
    static const std::regex pattern(R"(^\s*([A-Za-z_][A-Za-z0-9_]*)\s*=([^=].*)$)");
    std::smatch m;
    if (!std::regex_match(text, m, pattern))
        return std::nullopt;
    return Named{m[1].str(), m[2].str()};
}

Named require_name(const std::string& option, const std::string& text, const char* example) {
    auto named = split_name(text);
    if (!named)
        throw UsageError(fmt::format("{} \"{}\": expected name=expression, e.g. {} \"{}\"", option,
                                     text, option, example));
    return *named;
}

double parse_level(const std::string& option, const std::string& text) {
    std::size_t used = 0;
    double level = 0;
    try {
        level = std::stod(text, &used);
    } catch (const std::exception&) {
        used = 0;
    }
    if (used != text.size() || !(level > 0 && level < 1))
        throw UsageError(fmt::format(
            "{} {}: the level must be a probability strictly between 0 and 1, e.g. 0.999", option,
            text));
    return level;
}

// Levels per measure name ("" = every measure), from "load:0.999" or "0.999".
std::vector<std::pair<std::string, double>> parse_quantiles(const std::vector<std::string>& specs) {
    std::vector<std::pair<std::string, double>> out;
    for (const auto& s : specs) {
        const auto colon = s.rfind(':');
        if (colon == std::string::npos)
            out.emplace_back("", parse_level("--quantile", s));
        else
            out.emplace_back(s.substr(0, colon), parse_level("--quantile", s.substr(colon + 1)));
    }
    return out;
}

std::vector<double> levels_for(const std::string& measure,
                               const std::vector<std::pair<std::string, double>>& asked) {
    std::vector<double> levels = standard_levels;
    for (const auto& [name, level] : asked)
        if (name.empty() || name == measure)
            levels.push_back(level);
    std::sort(levels.begin(), levels.end());
    levels.erase(std::unique(levels.begin(), levels.end()), levels.end());
    return levels;
}

// The chain named in the result, as the solve saw it: the path may be relative to
// the folder the solve ran in, which is often the result's own folder.
std::string locate_chain(const std::string& recorded, const std::string& result_path) {
    if (fs::exists(recorded))
        return recorded;
    const fs::path beside = fs::path(result_path).parent_path() / fs::path(recorded).filename();
    if (fs::exists(beside))
        return beside.string();
    throw InputError(
        fmt::format("{}: its chain file '{}' does not exist (moved?); name it with --chain FILE",
                    result_path, recorded));
}

SolveRecord solve_record(const io::ResultInfo& info) {
    SolveRecord s;
    const auto& c = info.certificate;
    s.method = c.method;
    s.residual = c.residual;
    s.tolerance = c.tolerance;
    s.residual_definition = c.residual_definition;
    s.converged = c.converged;
    s.iterations = c.iterations;
    s.wall_seconds = c.wall_seconds;
    s.ranks = c.ranks;
    s.history = info.history;
    s.error_estimate = info.error_estimate;
    s.error_estimate_method = info.certificate.error_estimate_method;
    return s;
}

// Collective. Mass at a declared bound that is not negligible: the bound may cut
// off an unbounded quantity (a queue that could grow), biasing every answer. The
// masses are summed over the states, not read off the record's pmf, which holds
// bins when the variable has many values.
void note_bounds(MPI_Comm comm, const io::StateVariable& v, std::span<const double> pi,
                 io::MeasureRecord& m, double threshold, std::vector<std::string>& warnings) {
    summary::add_bound_masses(comm, m, v.values, pi, v.lower, v.upper);
    if (m.mass_at_upper && *m.mass_at_upper > threshold)
        warnings.push_back(fmt::format(
            "P({} = {}) = {:.2e} at its declared upper bound exceeds {:.0e}: if the bound cuts "
            "off an unbounded quantity the results are biased (widen it and solve again); a "
            "real capacity needs no action",
            v.name, *v.upper, *m.mass_at_upper, threshold));
}

} // namespace

SummaryReport run_summary(MPI_Comm comm, const SummaryRequest& request) {
    SummaryReport report;
    report.result_path = request.result_path;
    report.default_levels = standard_levels;

    io::ResultInfo info;
    agree_on_local_work(comm, [&] { info = io::read_result_info(request.result_path); });
    if (!info.has_distribution)
        throw InputError(
            fmt::format("{}: solved class by class without a start, so there is no single long-run "
                        "distribution to summarize; solve again with --per-class --from STATE",
                        request.result_path));
    std::string chain_path;
    agree_on_local_work(comm, [&] {
        chain_path = request.chain_path ? *request.chain_path
                                        : locate_chain(info.origin.chain_path, request.result_path);
    });
    report.chain_path = chain_path;
    report.solve = solve_record(info);

    const LoadedChain loaded = load_chain(chain_path, comm, io::ValidationOptions{});
    const io::Chain& chain = loaded.chain;
    if (chain.states != info.states)
        throw InputError(fmt::format("{}: {} states, but the result {} has {}; is it the chain "
                                     "that was solved?",
                                     chain_path, chain.states, request.result_path, info.states));
    // The same on every rank: the hash is reduced over all of them.
    switch (io::match_chain(info.origin.chain_hash, chain.content_hash)) {
    case io::ChainMatch::differs: {
        InputError e(io::chain_changed_message(request.result_path, info.origin.chain_hash,
                                               chain_path, chain.content_hash,
                                               "solve it again, or name the solved chain with "
                                               "--chain"));
        e.mark_agreed();
        throw e;
    }
    case io::ChainMatch::not_recorded:
        io::note_unrecorded_chain(comm, request.result_path, "written by an older longrun",
                                  "its number of states");
        break;
    case io::ChainMatch::same:
        break;
    }
    report.kind = io::to_string(chain.kind);
    report.states = chain.states;
    report.transitions = chain.transitions;
    report.model_file = chain.model_file;
    report.model_text = chain.model_text;
    report.parameters = chain.parameters;

    const std::vector<double> pi =
        io::read_distribution_slice(request.result_path, comm, chain.rows, chain.states);

    summary::StateTable table(chain);
    struct Wanted {
        std::string name, origin;
        const io::StateVariable* variable = nullptr;
    };
    std::vector<Wanted> wanted;
    for (const auto& v : chain.variables)
        wanted.push_back({v.name, "state variable", &v});
    for (const auto& m : chain.measures)
        wanted.push_back({m.name, "chain measure", nullptr});
    for (const auto& text : request.measures) {
        const Named n = require_name("--measure", text, "load=waiting+busy");
        if (table.has(n.name))
            throw UsageError(fmt::format("--measure {}: the chain already has a quantity named "
                                         "'{}'; choose another name",
                                         text, n.name));
        auto values = table.evaluate(n.expression, "--measure " + text);
        const bool integral =
            std::all_of(values.begin(), values.end(), [](double x) { return x == std::floor(x); });
        int local_integral = integral ? 1 : 0, all_integral = 0;
        MPI_Allreduce(&local_integral, &all_integral, 1, MPI_INT, MPI_MIN, comm);
        table.add(n.name, std::move(values), all_integral == 1);
        wanted.push_back({n.name, "--measure " + text, nullptr});
    }

    const auto asked_levels = parse_quantiles(request.quantiles);
    for (const auto& [name, level] : asked_levels)
        if (!name.empty() && !table.has(name))
            throw UsageError(fmt::format("--quantile {}:{}: no measure or state variable named "
                                         "'{}' (known: {})",
                                         name, level, name, fmt::join(table.names(), ", ")));

    std::vector<summary::Condition> conditions;
    for (const auto& text : request.given)
        conditions.push_back({text, table.evaluate(text, "--given " + text)});

    for (const auto& w : wanted) {
        const auto levels = levels_for(w.name, asked_levels);
        io::MeasureRecord m = summary::summarize_measure(
            comm, w.name, w.origin, table.column(w.name), pi, levels, conditions);
        if (w.variable)
            note_bounds(comm, *w.variable, pi, m, report.truncation_threshold, report.warnings);
        report.summary.measures.push_back(std::move(m));
    }

    std::set<std::string> tail_names;
    for (const auto& text : request.tails) {
        const auto named = split_name(text);
        const std::string name = named ? named->name : text;
        const std::string condition = named ? named->expression : text;
        if (!tail_names.insert(name).second)
            throw UsageError(fmt::format("--tail {}: a second tail named '{}'", text, name));
        const auto holds = table.evaluate(condition, "--tail " + text);
        report.summary.probabilities.push_back(
            {name, condition, summary::probability_of(comm, holds, pi)});
    }

    report.summary.rate_unit = chain.kind == io::ChainKind::ctmc ? "per unit time" : "per step";
    report.summary.events = summary::event_rates(comm, chain, pi);
    const auto labelled = report.summary.events;
    for (const auto& text : request.rates)
        report.summary.events.push_back(summary::derived_rate(text, labelled));
    report.summary.likely_states = summary::likely_states(comm, chain, pi, request.top);
    summary::apply_error_bound(report.summary, report.solve.error_estimate);

    if (request.store)
        agree_on_local_work(comm, [&] {
            if (comm_rank(comm) == 0)
                io::write_summary(request.result_path, report.summary);
        });
    return report;
}

} // namespace longrun::cli

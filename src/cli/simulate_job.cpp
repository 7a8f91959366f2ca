#include "simulate_job.hpp"

#include "structure_report.hpp"

#include "io/chain_file.hpp"
#include "io/chain_hash.hpp"
#include "io/iterate_file.hpp"
#include "io/mpi_agree.hpp"
#include "io/mpi_gather.hpp"
#include "io/summary_file.hpp"
#include "summary/event_rates.hpp"
#include "summary/measure_summary.hpp"
#include "summary/state_table.hpp"

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <map>

namespace longrun::cli {

namespace {

using simulate::Estimate;
using simulate::ReplicationResult;

std::string trimmed(const std::string& s) {
    const auto first = s.find_first_not_of(" \t");
    if (first == std::string::npos)
        return "";
    return s.substr(first, s.find_last_not_of(" \t") - first + 1);
}

std::optional<double> parse_number(const std::string& text) {
    std::size_t used = 0;
    try {
        const double x = std::stod(text, &used);
        if (used == text.size())
            return x;
    } catch (const std::exception&) {
    }
    return std::nullopt;
}

void check_request(const SimulateRequest& r) {
    const auto& len = r.length;
    if (len.time.has_value() == len.steps.has_value())
        throw UsageError("give the run length as either --time T or --steps N (one of them)");
    if (len.time && !(*len.time > 0 && std::isfinite(*len.time)))
        throw UsageError(
            fmt::format("--time {}: the run length must be a positive number", *len.time));
    if (len.steps && *len.steps == 0)
        throw UsageError("--steps 0: the run length must be at least one step");
    if (!(len.warmup >= 0 && std::isfinite(len.warmup)))
        throw UsageError(fmt::format("--warmup {}: must be 0 or more", len.warmup));
    if (r.replications == 0)
        throw UsageError("--replications 0: at least one replication is needed");
    if (!(r.confidence > 0 && r.confidence < 1))
        throw UsageError(
            fmt::format("--confidence {}: a level strictly between 0 and 1 is needed, e.g. 0.95",
                        r.confidence));
}

// Replications travel between ranks as CBOR (doubles keep every bit).
nlohmann::json to_json(const ReplicationResult& r) {
    nlohmann::json j;
    j["index"] = r.index;
    j["transitions"] = r.transitions;
    j["simulated"] = r.simulated;
    j["wall_seconds"] = r.wall_seconds;
    j["final_state"] = r.final_state;
    if (r.absorbed_in)
        j["absorbed_in"] = *r.absorbed_in;
    auto& e = j["estimates"] = nlohmann::json::array();
    for (const auto& x : r.estimates)
        e.push_back(
            {x.name, x.kind, x.mean, x.half_width, x.standard_error, x.batches, x.batch_size});
    return j;
}

ReplicationResult from_json(const nlohmann::json& j) {
    ReplicationResult r;
    r.index = j.at("index").get<std::uint64_t>();
    r.transitions = j.at("transitions").get<std::uint64_t>();
    r.simulated = j.at("simulated").get<double>();
    r.wall_seconds = j.at("wall_seconds").get<double>();
    r.final_state = j.at("final_state").get<std::uint64_t>();
    if (j.contains("absorbed_in"))
        r.absorbed_in = j["absorbed_in"].get<std::uint64_t>();
    for (const auto& x : j.at("estimates")) {
        Estimate e;
        e.name = x[0].get<std::string>();
        e.kind = x[1].get<std::string>();
        e.mean = x[2].get<double>();
        e.half_width = x[3].get<double>();
        e.standard_error = x[4].get<double>();
        e.batches = x[5].get<std::uint64_t>();
        e.batch_size = x[6].get<double>();
        r.estimates.push_back(std::move(e));
    }
    return r;
}

// Collective: every rank's replications on every rank, in index order.
std::vector<ReplicationResult> gather_everywhere(MPI_Comm comm,
                                                 const std::vector<ReplicationResult>& mine) {
    nlohmann::json local = nlohmann::json::array();
    for (const auto& r : mine)
        local.push_back(to_json(r));
    const std::vector<std::uint8_t> bytes = nlohmann::json::to_cbor(local);
    const auto all = gather_runs_to_all<std::uint8_t>(comm, bytes);
    std::vector<ReplicationResult> out;
    for (std::size_t i = 0; i + 1 < all.offsets.size(); ++i) {
        const auto first = all.items.begin() + static_cast<std::ptrdiff_t>(all.offsets[i]);
        const auto last = all.items.begin() + static_cast<std::ptrdiff_t>(all.offsets[i + 1]);
        const auto part = nlohmann::json::from_cbor(first, last);
        for (const auto& j : part)
            out.push_back(from_json(j));
    }
    std::sort(out.begin(), out.end(),
              [](const auto& a, const auto& b) { return a.index < b.index; });
    return out;
}

// The solved value of each quantity, by (kind, name), exactly as `summarize`
// finds it: means under /distribution and long-run event rates. Serial (the
// whole chain is here): the calls run on MPI_COMM_SELF.
std::map<std::pair<std::string, std::string>, double> solved_values(const io::Chain& chain,
                                                                    const std::string& chain_path,
                                                                    const std::string& result,
                                                                    bool& hash_recorded) {
    const io::ResultInfo info = io::read_result_info(result);
    if (!info.has_distribution)
        throw InputError(
            fmt::format("{}: solved class by class without a start, so there is no single long-run "
                        "distribution to compare with; solve again with --per-class --from STATE",
                        result));
    if (info.states != chain.states)
        throw InputError(fmt::format("--against {}: {} states, but the chain has {}; is it a "
                                     "result of this chain?",
                                     result, info.states, chain.states));
    const auto match = io::match_chain(info.origin.chain_hash, chain.content_hash);
    if (match == io::ChainMatch::differs)
        throw InputError(io::chain_changed_message("--against " + result, info.origin.chain_hash,
                                                   chain_path, chain.content_hash,
                                                   "simulate the chain that was solved"));
    hash_recorded = match != io::ChainMatch::not_recorded;
    const std::vector<double> pi =
        io::read_distribution_slice(result, MPI_COMM_SELF, chain.rows, chain.states);
    const summary::StateTable table(chain);
    std::map<std::pair<std::string, std::string>, double> out;
    auto mean_of = [&](const std::string& name, const char* origin) {
        return summary::summarize_measure(MPI_COMM_SELF, name, origin, table.column(name), pi, {},
                                          {})
            .mean;
    };
    for (const auto& v : chain.variables)
        out[{"variable", v.name}] = mean_of(v.name, "state variable");
    for (const auto& m : chain.measures)
        out[{"measure", m.name}] = mean_of(m.name, "chain measure");
    for (const auto& e : summary::event_rates(MPI_COMM_SELF, chain, pi))
        out[{"event", e.name}] = e.rate;
    return out;
}

// The solved value carries the solver's own error (a residual near 1e-10), so
// an interval of zero width (a constant quantity) still matches it.
bool contains(const Estimate& e, double solved) {
    const double slack = 1e-9 * std::max(1.0, std::abs(solved));
    return !(std::abs(e.mean - solved) > e.half_width + slack);
}

std::string percent(double level) {
    return fmt::format("{:.6g}%", 100 * level);
}

} // namespace

std::uint64_t find_start_state(const io::Chain& chain, const std::string& text) {
    const std::string spec = trimmed(text);
    if (!spec.empty() &&
        std::all_of(spec.begin(), spec.end(), [](char c) { return c >= '0' && c <= '9'; })) {
        std::uint64_t s = 0;
        try {
            s = std::stoull(spec);
        } catch (const std::exception&) {
            s = chain.states;
        }
        if (s >= chain.states)
            throw UsageError(
                fmt::format("--from {}: not a state of the chain (0..{})", spec, chain.states - 1));
        return s;
    }
    std::vector<std::pair<const io::StateVariable*, double>> wanted;
    std::size_t begin = 0;
    while (begin <= spec.size()) {
        const auto comma = std::min(spec.find(',', begin), spec.size());
        const std::string part = trimmed(spec.substr(begin, comma - begin));
        begin = comma + 1;
        const auto eq = part.find('=');
        const auto value =
            eq == std::string::npos ? std::nullopt : parse_number(trimmed(part.substr(eq + 1)));
        if (!value)
            throw UsageError(fmt::format("--from {}: expected a state index or variable values "
                                         "like q1=3,q2=0",
                                         text));
        const std::string name = trimmed(part.substr(0, eq));
        const auto it = std::find_if(chain.variables.begin(), chain.variables.end(),
                                     [&](const auto& v) { return v.name == name; });
        if (it == chain.variables.end()) {
            std::vector<std::string> known;
            for (const auto& v : chain.variables)
                known.push_back(v.name);
            throw UsageError(
                fmt::format("--from {}: the chain has no state variable '{}' ({})", text, name,
                            known.empty() ? std::string("it has none: give a state "
                                                        "index")
                                          : "known: " + fmt::format("{}", fmt::join(known, ", "))));
        }
        wanted.emplace_back(&*it, *value);
    }
    std::vector<std::uint64_t> matches;
    for (std::uint64_t s = 0; s < chain.states && matches.size() < 3; ++s)
        if (std::all_of(wanted.begin(), wanted.end(),
                        [&](const auto& w) { return w.first->values[s] == w.second; }))
            matches.push_back(s);
    if (matches.empty())
        throw UsageError(fmt::format("--from {}: no state of the chain has these values", text));
    if (matches.size() > 1)
        throw UsageError(fmt::format("--from {}: several states have these values (states {}, "
                                     "...); give more variables or a state index",
                                     text, fmt::join(matches, ", ")));
    return matches.front();
}

SimulateReport run_simulation(MPI_Comm comm, const SimulateRequest& request) {
    const auto started = std::chrono::steady_clock::now();
    check_request(request);
    SimulateReport report;
    report.chain_path = request.chain_path;
    report.ranks = comm_size(comm);
    report.confidence = request.confidence;
    report.against = request.against;

    // Every rank reads the whole chain itself: a replication needs every row
    // and the ranks read in parallel, so no rank waits for a broadcast.
    io::Chain chain;
    agree_on_local_work(
        comm, [&] { chain = io::read_whole_chain(request.chain_path, request.validation); });
    report.kind = io::to_string(chain.kind);
    report.states = chain.states;
    report.transitions = chain.transitions;
    if (chain.kind == io::ChainKind::dtmc && request.length.time)
        throw UsageError(fmt::format("--time: {} is a dtmc, whose clock is its steps; give "
                                     "--steps N",
                                     request.chain_path));
    report.length_unit = request.length.time ? "time" : "steps";

    agree_on_local_work(comm, [&] {
        report.start_state = request.from ? find_start_state(chain, *request.from) : 0;
    });
    report.start_description = describe_states(MPI_COMM_SELF, chain, {report.start_state}).front();

    // Before the long part: a result that cannot be compared is found now.
    std::map<std::pair<std::string, std::string>, double> solved;
    if (request.against) {
        bool hash_recorded = true;
        agree_on_local_work(comm, [&] {
            solved = solved_values(chain, request.chain_path, *request.against, hash_recorded);
        });
        if (!hash_recorded)
            io::note_unrecorded_chain(comm, *request.against, "written by an older longrun",
                                      "its number of states");
    }

    simulate::SimulationSettings settings;
    settings.length = request.length;
    settings.seed = request.seed;
    settings.start_state = report.start_state;
    settings.confidence = request.confidence;
    const auto rank = static_cast<std::uint64_t>(comm_rank(comm));
    const auto size = static_cast<std::uint64_t>(comm_size(comm));
    std::vector<ReplicationResult> mine;
    agree_on_local_work(comm, [&] {
        if (rank >= request.replications)
            return;
        const auto prepared = simulate::prepare(chain);
        for (std::uint64_t r = rank; r < request.replications; r += size) {
            mine.push_back(simulate::run_replication(*prepared, settings, r));
            if (request.on_replication)
                request.on_replication(mine.back());
        }
    });
    report.replications = gather_everywhere(comm, mine);

    std::vector<std::uint64_t> finals;
    for (const auto& r : report.replications) {
        finals.push_back(r.final_state);
        report.total_transitions += r.transitions;
    }
    const auto words = describe_states(MPI_COMM_SELF, chain, finals);
    for (std::size_t i = 0; i < report.replications.size(); ++i) {
        const auto& r = report.replications[i];
        report.ends.push_back({r.index, r.final_state, words[i], r.absorbed_in.has_value()});
    }

    if (report.replications.size() > 1)
        report.disagreeing = simulate::disagreeing_quantities(report.replications);
    const std::string against = request.against.value_or("");

    if (!report.ergodic_from_start()) {
        report.verdict =
            fmt::format("{} ({})", not_ergodic_words, fmt::join(report.disagreeing, ", "));
        if (request.against) {
            report.verdict += fmt::format(
                "; {} was not compared: no single long-run distribution describes this start",
                against);
            report.exit_code = static_cast<int>(ExitCode::disagreement);
        }
    } else if (!request.against) {
        report.pooled_confidence = request.confidence;
        report.pooled = simulate::pool(report.replications, report.pooled_confidence);
        report.verdict =
            report.replications.size() > 1
                ? fmt::format("the {} replications agree with each other; pooled estimates with "
                              "{} intervals",
                              report.replications.size(), percent(request.confidence))
                : "one replication: whether the chain is ergodic from this start was not tested "
                  "(use --replications 2 or more)";
    } else {
        const auto& first = report.replications.front().estimates;
        for (const auto& e : first)
            report.compared += solved.count({e.kind, e.name});
        const double m = static_cast<double>(std::max<std::size_t>(report.compared, 1));
        report.pooled_confidence = 1 - (1 - request.confidence) / m;
        report.pooled = simulate::pool(report.replications, report.pooled_confidence);
        std::vector<std::string> flagged;
        for (const auto& e : report.pooled) {
            Comparison c{e.name, e.kind, std::nullopt, true};
            if (const auto it = solved.find({e.kind, e.name}); it != solved.end()) {
                c.solved = it->second;
                c.agrees = contains(e, it->second);
            }
            if (!c.agrees)
                flagged.push_back(e.name);
            report.comparisons.push_back(std::move(c));
        }
        report.disagreements = flagged.size();
        const std::string level = fmt::format(
            "{} intervals each (Bonferroni: {} for all {} together)",
            percent(report.pooled_confidence), percent(request.confidence), report.compared);
        if (flagged.empty())
            report.verdict = fmt::format("agrees with {}: all {} solved values lie within the "
                                         "simulation's {}",
                                         against, report.compared, level);
        else {
            report.verdict = fmt::format("DISAGREES with {}: {} of {} solved values lie outside "
                                         "the simulation's {}: {}",
                                         against, flagged.size(), report.compared, level,
                                         fmt::join(flagged, ", "));
            report.exit_code = static_cast<int>(ExitCode::disagreement);
        }
    }
    report.wall_seconds =
        std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
    return report;
}

} // namespace longrun::cli

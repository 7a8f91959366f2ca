#include "simulate_output.hpp"

#include <fmt/format.h>

#include <algorithm>

namespace longrun::cli {

namespace {

using simulate::Estimate;

std::string percent(double level) {
    return fmt::format("{:.6g}%", 100 * level);
}

std::string length_words(const SimulateRequest& r) {
    const auto& len = r.length;
    std::string text =
        len.time ? fmt::format("time {:g}", *len.time) : fmt::format("{} steps", *len.steps);
    if (len.warmup > 0)
        text += fmt::format(" after a warm-up of {:g}", len.warmup);
    return text;
}

struct Column {
    std::string title;
    std::vector<std::string> cells;
    bool left = false;
};

std::string table(const std::vector<Column>& columns) {
    std::vector<std::size_t> width;
    for (const auto& c : columns) {
        std::size_t w = c.title.size();
        for (const auto& s : c.cells)
            w = std::max(w, s.size());
        width.push_back(w);
    }
    auto row = [&](auto cell) {
        std::string line = " ";
        for (std::size_t i = 0; i < columns.size(); ++i) {
            const std::string s = cell(i);
            line += columns[i].left ? fmt::format(" {:<{}}", s, width[i])
                                    : fmt::format(" {:>{}}", s, width[i]);
        }
        while (!line.empty() && line.back() == ' ')
            line.pop_back();
        return line + "\n";
    };
    std::string out = row([&](std::size_t i) { return columns[i].title; });
    const std::size_t rows = columns.empty() ? 0 : columns.front().cells.size();
    for (std::size_t r = 0; r < rows; ++r)
        out += row([&](std::size_t i) { return columns[i].cells[r]; });
    return out;
}

std::string number(double x) {
    return fmt::format("{:.6g}", x);
}
std::string width(double x) {
    return fmt::format("{:.2g}", x);
}

std::string estimates_table(const std::vector<Estimate>& estimates, double confidence,
                            const std::vector<Comparison>* comparisons) {
    Column name{"quantity", {}, true}, kind{"kind", {}, true}, mean{"estimate", {}},
        hw{"+- (" + percent(confidence) + ")", {}}, solved{"solved", {}},
        verdict{"verdict", {}, true};
    for (std::size_t i = 0; i < estimates.size(); ++i) {
        const auto& e = estimates[i];
        name.cells.push_back(e.name);
        kind.cells.push_back(e.kind);
        mean.cells.push_back(number(e.mean));
        hw.cells.push_back(width(e.half_width));
        if (comparisons) {
            const auto& c = (*comparisons)[i];
            solved.cells.push_back(c.solved ? number(*c.solved) : "-");
            verdict.cells.push_back(!c.solved ? "not solved" : c.agrees ? "ok" : "DISAGREES");
        }
    }
    std::vector<Column> columns{name, kind, mean, hw};
    if (comparisons) {
        columns.push_back(solved);
        columns.push_back(verdict);
    }
    return table(columns);
}

nlohmann::json estimate_json(const Estimate& e) {
    return {{"name", e.name},
            {"kind", e.kind},
            {"mean", e.mean},
            {"half_width", e.half_width},
            {"standard_error", e.standard_error},
            {"batches", e.batches},
            {"batch_size", e.batch_size}};
}

} // namespace

std::string replication_line(const simulate::ReplicationResult& r, std::uint64_t of,
                             const std::string& unit) {
    return fmt::format("replication {} of {} done: {} transitions, {} {:g}, {:.1f} s ({:.3g} "
                       "transitions/s){}",
                       r.index + 1, of, r.transitions, unit, r.simulated, r.wall_seconds,
                       r.wall_seconds > 0 ? r.transitions / r.wall_seconds : 0.0,
                       r.absorbed_in ? fmt::format(", absorbed in state {}", *r.absorbed_in) : "");
}

std::string simulate_text(const SimulateReport& report, const SimulateRequest& request,
                          bool per_replication) {
    std::string out = fmt::format(
        "simulated {} ({}, {} states, {} transitions): {} replication{} of {}, seed {}, "
        "on {} rank{}\nstart: {}\n",
        report.chain_path, report.kind, report.states, report.transitions,
        report.replications.size(), report.replications.size() == 1 ? "" : "s",
        length_words(request), request.seed, report.ranks, report.ranks == 1 ? "" : "s",
        report.start_description);

    if (per_replication || !report.ergodic_from_start())
        for (const auto& r : report.replications) {
            const auto& end = report.ends[r.index];
            out += fmt::format("\nreplication {}: {} transitions, {} {:g}; ended in {}{}\n",
                               r.index, r.transitions, report.length_unit, r.simulated,
                               end.description, end.absorbed ? " (absorbed: no way out)" : "");
            if (per_replication)
                out += estimates_table(r.estimates, report.confidence, nullptr);
        }

    if (!report.ergodic_from_start()) {
        out += "\nTime averages that differ across replications (each replication settled "
               "where it ended; pooling them would describe none of them):\n";
        for (const auto& name : report.disagreeing) {
            std::vector<std::string> values;
            for (const auto& r : report.replications)
                for (const auto& e : r.estimates)
                    if (e.name == name)
                        values.push_back(fmt::format("{}", number(e.mean)));
            out += fmt::format("  {}: {}\n", name, fmt::join(values, ", "));
        }
    } else {
        double busy = 0; // seconds spent inside replications, summed over them
        for (const auto& r : report.replications)
            busy += r.wall_seconds;
        out +=
            fmt::format("\npooled over {} replication{}, {} transitions in all ({:.3g} per "
                        "second per core):\n",
                        report.replications.size(), report.replications.size() == 1 ? "" : "s",
                        report.total_transitions, report.total_transitions / std::max(1e-9, busy));
        out += estimates_table(report.pooled, report.pooled_confidence,
                               report.against ? &report.comparisons : nullptr);
        if (report.against)
            out += fmt::format("(each interval at {} so that all {} together hold at {}: a "
                               "correct solve is flagged with probability at most {})\n",
                               percent(report.pooled_confidence), report.compared,
                               percent(report.confidence), percent(1 - report.confidence));
    }
    out += "\n" + report.verdict + "\n";
    return out;
}

nlohmann::json simulate_json(const SimulateReport& report, const SimulateRequest& request) {
    nlohmann::json j;
    j["chain"] = report.chain_path;
    j["kind"] = report.kind;
    j["states"] = report.states;
    j["transitions"] = report.transitions;
    j["ranks"] = report.ranks;
    j["seed"] = request.seed;
    auto& len = j["length"];
    if (request.length.time)
        len["time"] = *request.length.time;
    if (request.length.steps)
        len["steps"] = *request.length.steps;
    len["warmup"] = request.length.warmup;
    j["confidence"] = report.confidence;
    j["start"] = {{"state", report.start_state}, {"description", report.start_description}};
    auto& reps = j["replications"] = nlohmann::json::array();
    for (const auto& r : report.replications) {
        const auto& end = report.ends[r.index];
        nlohmann::json x{{"index", r.index},
                         {"transitions", r.transitions},
                         {"simulated", r.simulated},
                         {"wall_seconds", r.wall_seconds},
                         {"final_state", r.final_state},
                         {"final_description", end.description},
                         {"absorbed", end.absorbed}};
        auto& est = x["estimates"] = nlohmann::json::array();
        for (const auto& e : r.estimates)
            est.push_back(estimate_json(e));
        reps.push_back(std::move(x));
    }
    j["ergodic_from_start"] = report.ergodic_from_start();
    j["disagreeing"] = report.disagreeing;
    if (report.ergodic_from_start()) {
        auto& pooled = j["pooled"];
        pooled["confidence"] = report.pooled_confidence;
        auto& est = pooled["estimates"] = nlohmann::json::array();
        for (std::size_t i = 0; i < report.pooled.size(); ++i) {
            auto e = estimate_json(report.pooled[i]);
            if (report.against) {
                const auto& c = report.comparisons[i];
                e["solved"] = c.solved ? nlohmann::json(*c.solved) : nlohmann::json();
                e["agrees"] = c.solved ? nlohmann::json(c.agrees) : nlohmann::json();
            }
            est.push_back(std::move(e));
        }
    } else {
        j["pooled"] = nullptr;
    }
    if (report.against)
        j["against"] = {{"result", *report.against},
                        {"family_confidence", report.confidence},
                        {"per_quantity_confidence", report.pooled_confidence},
                        {"compared", report.compared},
                        {"disagreements", report.disagreements}};
    j["total_transitions"] = report.total_transitions;
    j["wall_seconds"] = report.wall_seconds;
    j["verdict"] = report.verdict;
    j["exit_code"] = report.exit_code;
    return j;
}

} // namespace longrun::cli

#include "structure_report.hpp"

#include <fmt/format.h>

#include <cmath>

namespace longrun::cli {

solve::LocalRows local_rows_of(const io::Chain& chain) {
    solve::LocalRows rows;
    rows.time = chain.kind == io::ChainKind::ctmc ? solve::TimeModel::continuous
                                                  : solve::TimeModel::discrete;
    rows.states = chain.states;
    rows.rows = chain.rows;
    rows.offsets = chain.offsets;
    rows.targets = chain.targets;
    rows.weights = chain.weights;
    return rows;
}

std::vector<std::string> describe_states(MPI_Comm comm, const io::Chain& slice,
                                         const std::vector<std::uint64_t>& states) {
    const std::size_t nv = slice.variables.size();
    std::vector<double> mine(states.size() * nv, 0.0), all(mine.size(), 0.0);
    for (std::size_t i = 0; i < states.size(); ++i)
        if (slice.rows.contains(states[i]))
            for (std::size_t v = 0; v < nv; ++v)
                mine[i * nv + v] = slice.variables[v].values[states[i] - slice.rows.begin];
    if (!mine.empty())
        MPI_Allreduce(mine.data(), all.data(), static_cast<int>(mine.size()), MPI_DOUBLE, MPI_SUM,
                      comm);
    std::vector<std::string> out;
    for (std::size_t i = 0; i < states.size(); ++i) {
        std::string text = fmt::format("state {}", states[i]);
        if (nv > 0) {
            text += " (";
            for (std::size_t v = 0; v < nv; ++v) {
                const double x = all[i * nv + v];
                text += fmt::format("{}{}={}", v ? ", " : "", slice.variables[v].name,
                                    slice.variables[v].integral
                                        ? fmt::format("{}", static_cast<long long>(std::llround(x)))
                                        : fmt::format("{:.6g}", x));
            }
            text += ")";
        }
        out.push_back(std::move(text));
    }
    return out;
}

StructureWords describe_structure(MPI_Comm comm, const io::Chain& slice,
                                  const analysis::Structure& s) {
    StructureWords w;
    const bool dtmc = slice.kind == io::ChainKind::dtmc;
    auto& j = w.json;
    j["states"] = s.states;
    j["transitions"] = slice.transitions;
    j["kind"] = io::to_string(slice.kind);
    j["edges"] = s.edges;
    j["degree"] = {{"out_min", s.min_out_degree},
                   {"out_mean", s.mean_out_degree},
                   {"out_max", s.max_out_degree},
                   {"in_max", s.max_in_degree}};
    j["self_loops"] = s.self_loops;
    j["zero_weights"] = s.zero_weights;
    j["strongly_connected_components"] = {{"count", s.components},
                                          {"largest_sizes", s.largest_components}};
    j["weak_coupling"] = {{"weak_edges", s.weak_edges},
                          {"weak_ratio", analysis::Structure::weak_ratio},
                          {"strong_blocks", s.strong_blocks},
                          {"states_in_blocks", s.states_in_blocks},
                          {"nearly_decomposable", s.nearly_decomposable()}};
    nlohmann::json classes = nlohmann::json::array();
    std::string class_lines;
    std::uint64_t absorbing = 0;
    for (std::size_t k = 0; k < s.closed.size(); ++k) {
        const auto& c = s.closed[k];
        absorbing += c.absorbing() ? 1 : 0;
        const auto reps = describe_states(comm, slice, c.representatives);
        nlohmann::json cj = {{"size", c.size},
                             {"absorbing", c.absorbing()},
                             {"representatives", c.representatives},
                             {"described", reps}};
        if (dtmc)
            cj["period"] = c.period;
        classes.push_back(cj);
        if (k < 20) {
            class_lines += fmt::format("  class {}: {} state{}{}{}\n", k + 1, c.size,
                                       c.size == 1 ? "" : "s", c.absorbing() ? " (absorbing)" : "",
                                       dtmc ? fmt::format(", period {}", c.period) : "");
            for (const auto& r : reps)
                class_lines += "      " + r + "\n";
        }
    }
    if (s.closed.size() > 20)
        class_lines +=
            fmt::format("  ... and {} more closed classes (see --json)\n", s.closed.size() - 20);
    j["closed_classes"] = classes;
    j["absorbing_states"] = absorbing;
    const auto transient_reps = describe_states(comm, slice, s.transient_representatives);
    j["transient"] = {{"count", s.transient},
                      {"representatives", s.transient_representatives},
                      {"described", transient_reps}};
    j["unique_stationary_distribution"] = s.unique();

    std::string periodic;
    if (dtmc && s.unique() && s.closed.front().period > 1)
        periodic = fmt::format(" (periodic with period {}: the long-run distribution is the "
                               "time average; the chain itself keeps cycling)",
                               s.closed.front().period);
    if (s.unique()) {
        w.verdict = "a unique stationary distribution exists" + periodic;
        if (s.transient > 0)
            w.verdict += fmt::format("; {} transient state{} probability 0", s.transient,
                                     s.transient == 1 ? " gets" : "s get");
    } else {
        std::string which;
        for (std::size_t k = 0; k < s.closed.size() && k < 3; ++k) {
            const auto& c = s.closed[k];
            which += (k ? "; " : "") +
                     (c.absorbing()
                          ? fmt::format("state {} absorbing", c.representatives[0])
                          : fmt::format("{} states from state {}", c.size, c.representatives[0]));
        }
        if (s.closed.size() > 3)
            which += "; ...";
        w.verdict = fmt::format("no unique stationary distribution: {} closed classes ({}), "
                                "{} absorbing state{}; the answer depends on where the chain "
                                "starts",
                                s.closed.size(), which, absorbing, absorbing == 1 ? "" : "s");
    }
    j["verdict"] = w.verdict;

    auto& t = w.text;
    t += fmt::format("chain        {} states, {} transitions ({})\n", s.states, slice.transitions,
                     io::to_string(slice.kind));
    t += fmt::format("degrees      out: min {}, mean {:.2f}, max {}; in: max {}\n",
                     s.min_out_degree, s.mean_out_degree, s.max_out_degree, s.max_in_degree);
    t += fmt::format(
        "self-loops   {}{}\n", s.self_loops,
        !dtmc && s.self_loops ? " (ignored: a rate from a state to itself does nothing)" : "");
    if (s.zero_weights)
        t += fmt::format("zero weights {} (treated as absent)\n", s.zero_weights);
    std::string largest;
    for (auto n : s.largest_components)
        largest += (largest.empty() ? "" : ", ") + std::to_string(n);
    t += fmt::format("components   {} strongly connected (largest: {})\n", s.components, largest);
    if (s.nearly_decomposable())
        t += fmt::format("coupling     nearly decomposable: {} blocks ({} states) joined only by "
                         "{} weak transitions (weight < {:g} x the state's largest)\n",
                         s.strong_blocks, s.states_in_blocks, s.weak_edges,
                         analysis::Structure::weak_ratio);
    t += fmt::format("closed       {} closed class{}, {} absorbing state{}\n", s.closed.size(),
                     s.closed.size() == 1 ? "" : "es", absorbing, absorbing == 1 ? "" : "s");
    t += class_lines;
    t += fmt::format("transient    {} state{}\n", s.transient, s.transient == 1 ? "" : "s");
    for (const auto& r : transient_reps)
        t += "      " + r + "\n";
    t += "verdict      " + w.verdict + "\n";
    return w;
}

} // namespace longrun::cli

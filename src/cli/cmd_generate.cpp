// `longrun generate`: a model description (YAML) -> chain file, explored on
// rank 0; the other ranks only wait for the verdict, so that the verb behaves
// the same alone and under mpirun.
#include "commands.hpp"
#include "option_range.hpp"
#include "paths.hpp"

#include "io/chain_file.hpp"
#include "io/mpi_agree.hpp"
#include "model/explore.hpp"
#include "model/model_file.hpp"

#include <fmt/format.h>
#include <unistd.h>

#include <memory>

namespace longrun::cli {

namespace {

struct GenerateOptions {
    std::string model, output;
    std::vector<std::string> sets;
    std::uint64_t max_states = 0;
    std::string lookup = "auto";
    bool quiet = false;
};

model::Overrides parse_sets(const std::vector<std::string>& sets) {
    model::Overrides out;
    for (const auto& s : sets) {
        const auto eq = s.find('=');
        if (eq == std::string::npos || eq == 0 || eq + 1 == s.size())
            throw UsageError(
                fmt::format("--set {}: expected name=value, e.g. --set arrival=5.5", s));
        out.emplace_back(s.substr(0, eq), s.substr(eq + 1));
    }
    return out;
}

int generate(MPI_Comm comm, const GenerateOptions& o) {
    agree_on_outputs(comm,
                     [&] {
                         require_distinct(o.model, o.output);
                         require_output_file(o.output);
                     },
                     {o.output});
    const auto overrides = parse_sets(o.sets);
    std::string summary;
    agree_on_local_work(comm, [&] {
        if (comm_rank(comm) != 0)
            return;
        const model::Model m = model::read_model_file(o.model, overrides);
        model::ExploreOptions eo;
        eo.max_states = o.max_states;
        eo.lookup = o.lookup == "direct" ? model::Lookup::direct
                    : o.lookup == "hash" ? model::Lookup::hash
                                         : model::Lookup::automatic;
        const bool terminal = ::isatty(STDERR_FILENO) != 0;
        eo.progress_interval = terminal ? 1.0 : 10.0;
        if (!o.quiet)
            eo.progress = [terminal](const model::ExploreProgress& p) {
                std::fprintf(stderr, "%s",
                             fmt::format("generate  {} states found, frontier {}, "
                                         "{:.3g} states/s, {:.0f} s{}",
                                         p.states, p.frontier,
                                         p.seconds > 0 ? (p.states - p.frontier) / p.seconds : 0.0,
                                         p.seconds, terminal ? "\r" : "\n")
                                 .c_str());
            };
        model::ExploreReport report;
        const io::Chain chain = model::explore(m, eo, &report);
        if (!o.quiet && terminal && report.seconds >= eo.progress_interval)
            std::fprintf(stderr, "\n");
        if (report.unintended_absorbing > 0)
            std::fprintf(stderr,
                         "longrun: warning: %s: %llu state(s) with no enabled event, e.g. %s; "
                         "`longrun check` reports them (declare 'absorbing' if meant)\n",
                         o.model.c_str(),
                         static_cast<unsigned long long>(report.unintended_absorbing),
                         report.first_unintended_absorbing.c_str());
        io::write_chain_file(o.output, chain);
        summary = fmt::format("wrote {}: {} chain, {} states, {} transitions ({} merged), "
                              "{:.2f} s, {:.3g} states/s",
                              o.output, io::to_string(chain.kind), chain.states, chain.transitions,
                              report.merged, report.seconds,
                              report.seconds > 0 ? chain.states / report.seconds : 0.0);
    });
    if (comm_rank(comm) == 0 && !o.quiet)
        std::printf("%s\n", summary.c_str());
    return 0;
}

} // namespace

Action add_generate(CLI::App& app) {
    auto o = std::make_shared<GenerateOptions>();
    auto* sub = app.add_subcommand(
        "generate",
        "Explore a model description (YAML) from its start state and write the reachable\n"
        "chain to a chain file, with state variables, event labels and measures.\n"
        "A whole model, an M/M/2/5 queue:\n"
        "  kind: ctmc                          # ctmc: rates; dtmc: probabilities\n"
        "  parameters: {arrival: 1.5, service: 1.0}\n"
        "  variables:                          # bounded integers\n"
        "    queue: {from: 0, to: 5}\n"
        "  start: {queue: 0}\n"
        "  events:\n"
        "    - name: arrive\n"
        "      when: \"queue < 5\"               # enabled where this is non-zero\n"
        "      rate: arrival\n"
        "      then: {queue: \"queue + 1\"}      # every new value from the old state\n"
        "    - name: leave\n"
        "      when: \"queue > 0\"\n"
        "      rate: \"min(queue, 2) * service\"\n"
        "      then: {queue: \"queue - 1\"}\n"
        "  measures: {full: \"queue == 5\"}       # stored per state in /measures\n"
        "Then: longrun generate queue.yaml -o queue.h5 --set arrival=1.8\n"
        "      longrun solve queue.h5 -o result.h5\n"
        "States are numbered in discovery order (the start is state 0). An update leaving\n"
        "its bounds, a negative or non-finite rate, or a dtmc state whose probabilities do\n"
        "not sum to 1 stops with one line naming the model file, line and state.\n"
        "Every key is described in the README, section \"Model descriptions\".");
    sub->footer("Exit codes: 0 done, 1 usage error, 2 bad model (or too many states), 6 output "
                "not written.");
    sub->add_option("model", o->model, "model description (YAML)")->required();
    sub->add_option("-o,--output", o->output, "chain file to write (.h5)")->required();
    sub->add_option("--set", o->sets, "override a parameter: --set name=value (repeatable)");
    sub->add_option("--max-states", o->max_states,
                    "stop with exit 2 above this many states (default: what fits in the "
                    "available memory)")
        ->check(whole_number_in(1));
    sub->add_option("--lookup", o->lookup,
                    "state table: auto, direct (array over all value combinations) or hash")
        ->check(CLI::IsMember({"auto", "direct", "hash"}))
        ->default_val("auto");
    sub->add_flag("--quiet", o->quiet, "no progress lines and no summary line");
    return [o](MPI_Comm comm) { return generate(comm, *o); };
}

} // namespace longrun::cli

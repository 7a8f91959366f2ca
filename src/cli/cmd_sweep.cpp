// `longrun sweep`: one model parameter over a range of values, a table of the
// answers, their plots, and where a condition first holds.
#include "commands.hpp"
#include "option_range.hpp"
#include "paths.hpp"
#include "solver_options.hpp"
#include "summarize_job.hpp"
#include "sweep_job.hpp"
#include "sweep_output.hpp"
#include "text_file.hpp"

#include "io/mpi_agree.hpp"

#include <fmt/format.h>

#include <cstdio>
#include <memory>

namespace longrun::cli {

namespace {

struct SweepOptions {
    SweepRequest request;
    SolverOptions solver;
    std::string model, vary, until, prefix, work, gather;
    std::vector<std::string> sets;
    long only = -1;
    bool quiet = false, verbose = false;
};

model::Overrides parse_sets(const std::vector<std::string>& sets) {
    model::Overrides out;
    for (const auto& s : sets) {
        const auto eq = s.find('=');
        if (eq == std::string::npos || eq == 0 || eq + 1 == s.size())
            throw UsageError(fmt::format("--set {}: expected name=value, e.g. --set service=2", s));
        out.emplace_back(s.substr(0, eq), s.substr(eq + 1));
    }
    return out;
}

// As solve warns (its --truncation-warn default).
constexpr double truncation_warning = 1e-6;

// The table, its files and the caution: the same after one run and after --gather.
void finish(MPI_Comm comm, const SweepTable& table, const std::string& prefix, bool quiet) {
    std::vector<std::string> written;
    agree_on_local_work(comm, [&] {
        if (comm_rank(comm) != 0)
            return;
        write_text_file(prefix + ".csv", sweep_csv(table));
        write_text_file(prefix + ".json", sweep_json(table).dump(2) + "\n");
        written = {prefix + ".csv", prefix + ".json"};
        const auto plots = write_sweep_plots(table, prefix); // PLplot: rank 0 only
        written.insert(written.end(), plots.begin(), plots.end());
    });
    if (comm_rank(comm) != 0)
        return;
    const SweepRow* worst = nullptr;
    std::size_t above = 0;
    for (const auto& row : table.rows)
        if (row.bound_mass > truncation_warning) {
            ++above;
            if (!worst || row.bound_mass > worst->bound_mass)
                worst = &row;
        }
    if (worst)
        std::fprintf(stderr, "%s\n",
                     fmt::format("longrun: warning: probability at a declared bound above {:.0e} "
                                 "at {} of {} points, largest {} = {:.2e} at {}={:g}: if the "
                                 "bound cuts off an unbounded quantity, the results are biased "
                                 "(widen it); a real capacity needs no action",
                                 truncation_warning, above, table.rows.size(), worst->bound_state,
                                 worst->bound_mass, table.axis.parameter, worst->value)
                         .c_str());
    std::string text = sweep_text(table);
    if (!quiet) {
        text += fmt::format("wrote {}, {}", written[0], written[1]);
        if (written.size() > 2)
            text += fmt::format(" and {} plots ({}-*.png, .svg)", written.size() - 2, prefix);
        text += "\n";
    }
    text += std::string("\n") + safety_caution + "\n";
    std::printf("%s", text.c_str());
    std::fflush(stdout);
}

int sweep_command(MPI_Comm comm, SweepOptions& o) {
    const int rank = comm_rank(comm);
    if (!o.gather.empty()) {
        if (!o.model.empty() || !o.vary.empty() || !o.prefix.empty() || o.only >= 0)
            throw UsageError("--gather PREFIX takes nothing else: it reads PREFIX.point-*.json "
                             "and writes PREFIX.csv, PREFIX.json and the plots");
        agree_on_outputs(comm,
                         [&] {
                             for (const char* ext : {".csv", ".json"})
                                 require_output_file(o.gather + ext);
                         },
                         {o.gather + ".csv"});
        SweepTable table;
        agree_on_local_work(comm, [&] {
            if (rank == 0)
                table = gather_point_files(o.gather);
        });
        // Only rank 0 read the files; it alone writes and prints.
        finish(comm, table, o.gather, o.quiet);
        return 0;
    }
    if (o.model.empty() || o.vary.empty() || o.prefix.empty())
        throw UsageError("sweep needs a model, --vary NAME=VALUES and -o PREFIX (or --gather "
                         "PREFIX)");

    auto& r = o.request;
    r.model_path = o.model;
    r.axis = parse_vary(o.vary);
    r.sets = parse_sets(o.sets);
    if (!o.until.empty())
        r.until = parse_until(o.until);
    if (o.only >= 0)
        r.only = static_cast<std::size_t>(o.only);
    r.method = o.solver.method;
    r.tolerance = o.solver.tolerance;
    r.residual_tolerance = o.solver.residual_tolerance;
    r.preconditioner = solve::preconditioner_named(o.solver.preconditioner);
    r.solver_progress = o.verbose;
    r.work_folder = o.work.empty() ? o.prefix + ".work" : o.work;

    // Hours of solving should not end in "cannot write": try the folder first.
    const std::string first_output =
        r.only ? point_file_name(o.prefix, *r.only) : o.prefix + ".csv";
    std::vector<std::string> outputs{first_output};
    if (!r.only)
        outputs.push_back(o.prefix + ".json");
    agree_on_outputs(comm,
                     [&] {
                         for (const auto& out : outputs) {
                             require_distinct(o.model, out);
                             require_output_file(out);
                         }
                     },
                     {first_output});

    const std::size_t total = r.only ? 1 : r.axis.values.size();
    std::size_t done = 0;
    if (!o.quiet)
        r.on_point = [&](const SweepRow& row) {
            ++done;
            if (rank == 0)
                std::fprintf(stderr, "%s\n",
                             fmt::format("sweep  point {}/{}  {}={:g}  {} states  {}  {:.2f} s  {}",
                                         r.only ? row.index + 1 : done,
                                         r.only ? r.axis.values.size() : total, r.axis.parameter,
                                         row.value, row.states, row.method, row.seconds,
                                         row.warm ? "warm start" : "cold start")
                                 .c_str());
        };

    const SweepTable table = run_sweep(comm, r);
    if (r.only) {
        agree_on_local_work(comm, [&] {
            if (rank == 0)
                write_point_file(o.prefix, table);
        });
        if (rank == 0 && !o.quiet)
            std::printf("wrote %s (gather all points with: longrun sweep --gather %s)\n",
                        first_output.c_str(), o.prefix.c_str());
        return 0;
    }
    finish(comm, table, o.prefix, o.quiet);
    return 0;
}

} // namespace

Action add_sweep(CLI::App& app) {
    auto o = std::make_shared<SweepOptions>();
    auto* sub = app.add_subcommand(
        "sweep",
        "Vary one parameter of a model description: for each value, generate the chain, solve\n"
        "it (warm-started from the previous value's answer when the number of states is the\n"
        "same), summarise it, and add a row to one table. Optionally stop at the first value\n"
        "where a condition holds and report where it was crossed.\n"
        "  longrun sweep queue.yaml --vary arrival=0.5:1.5:0.1 --tail \"full=queue==10\" \\\n"
        "      --measure \"load=queue\" --quantile load:0.99 --until \"P(full) > 0.05\" -o out/q\n"
        "prints a progress line per value and then the table, and writes out/q.csv, out/q.json\n"
        "and a plot per column against the parameter (out/q-P-full.png and .svg, ...). The\n"
        "last line says e.g. \"P(full) > 0.05 crossed between arrival=0.8 and 0.9;\n"
        "interpolated arrival = 0.897\": the value where the line through the two points meets\n"
        "the threshold (the true crossing lies between the two values; halve the step near\n"
        "it for a closer answer). A sweep that never crosses says so and exits 0.\n"
        "Values: start:stop:step (stop included, within rounding) or a list a,b,c.\n"
        "Columns: the parameter, states, method, residual, then mean(X) for every state\n"
        "variable, model measure and --measure, qLEVEL(X) for each --quantile (q0.99(load)),\n"
        "P(name) for each --tail, rate(e) for each event, and each --rate under its own name.\n"
        "--until takes one of these columns, a relation (> >= < <=) and a number.\n"
        "Cluster job arrays: each task computes one value, and one more step joins them:\n"
        "  longrun sweep queue.yaml --vary arrival=0.5:1.5:0.1 ... -o out/q --only $TASK_INDEX\n"
        "    (writes out/q.point-INDEX.json; indices 0 to number of values - 1; no warm start)\n"
        "  longrun sweep --gather out/q\n"
        "    (the same table, files and crossing as one run; says which points are missing)\n"
        "Chain and result files of the points go to PREFIX.work/ and are removed as the sweep\n"
        "goes, unless --keep (the results then also hold their /summary).\n"
        "Methods (--method NAME, or a comma list tried in order):\n" +
            methods_help());
    sub->footer("Exit codes: 0 done (also when --until never held), 1 usage error, 2 bad model "
                "or point files,\n4 a value with no certified answer, 6 output not written.");
    sub->add_option("model", o->model, "model description (YAML), as for generate");
    sub->add_option("--vary", o->vary, "NAME=start:stop:step or NAME=a,b,c: the parameter to vary")
        ->type_name("NAME=VALUES");
    sub->add_option("-o,--output", o->prefix,
                    "PREFIX of the outputs: PREFIX.csv, PREFIX.json, PREFIX-<column>.png/.svg")
        ->type_name("PREFIX");
    sub->add_option("--set", o->sets, "fix another parameter for the whole sweep (repeatable)");
    sub->add_option("--measure", o->request.measures,
                    "a quantity over state variables, e.g. \"load=waiting+busy\" (repeatable)");
    sub->add_option("--tail", o->request.tails,
                    "a condition whose probability is a column, e.g. \"load>=40\" or "
                    "\"full=queue==10\" (repeatable)");
    sub->add_option("--quantile", o->request.quantiles,
                    "NAME:LEVEL or LEVEL (every measure), e.g. load:0.999 (repeatable)");
    sub->add_option("--rate", o->request.rates,
                    "a formula over event rates, e.g. \"lost=drop/(drop+admit)\" (repeatable)");
    sub->add_option("--until", o->until,
                    "stop at the first value where this holds, e.g. \"P(full) > 0.01\"");
    sub->add_option("--only", o->only,
                    "compute just the point with this index (0-based; a job array's task index) "
                    "and write PREFIX.point-INDEX.json")
        ->check(whole_number_in(0, max_sweep_points - 1));
    sub->add_option("--gather", o->gather,
                    "merge PREFIX.point-*.json into the table, files and crossing")
        ->type_name("PREFIX");
    sub->add_option("--work", o->work,
                    "folder for the points' chain and result files "
                    "(default PREFIX.work)");
    sub->add_flag("--keep", o->request.keep, "keep the points' chain and result files");
    add_solver_options(sub, o->solver);
    sub->add_option("--max-states", o->request.max_states,
                    "stop with exit 2 when a value's chain has more states than this")
        ->check(whole_number_in(1));
    sub->add_flag("-q,--quiet", o->quiet, "no progress lines, no list of files written");
    sub->add_flag("--verbose", o->verbose, "also the solver's own progress lines");
    return [o](MPI_Comm comm) { return sweep_command(comm, *o); };
}

} // namespace longrun::cli

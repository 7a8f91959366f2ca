// `longrun summarize`: the answers people act on, from a solved result.
#include "commands.hpp"
#include "option_range.hpp"
#include "paths.hpp"
#include "summarize_job.hpp"
#include "summary_html.hpp"
#include "summary_output.hpp"
#include "summary_plots.hpp"
#include "text_file.hpp"

#include "io/mpi_agree.hpp"

#include <fmt/format.h>

#include <cstdio>
#include <memory>

namespace longrun::cli {

namespace {

struct SummarizeOptions {
    SummaryRequest request;
    std::string chain, json, csv, plot, report;
    bool no_store = false;
    bool quiet = false;
};

constexpr const char* to_stdout = "-";

int summarize_command(MPI_Comm comm, SummarizeOptions& o) {
    auto& r = o.request;
    if (!o.chain.empty())
        r.chain_path = o.chain;
    r.store = !o.no_store;
    r.progress = !o.quiet;
    if (o.json == to_stdout && o.csv == to_stdout)
        throw UsageError("--json - and --csv - would both print on stdout: send one to a file");
    std::vector<std::string> outputs;
    for (const auto* f : {&o.json, &o.csv, &o.report})
        if (!f->empty() && *f != to_stdout)
            outputs.push_back(*f);
    agree_on_outputs(
        comm,
        [&] {
            for (const auto& out : outputs) {
                require_distinct(r.result_path, out);
                if (r.chain_path)
                    require_distinct(*r.chain_path, out);
                require_output_file(out);
            }
            // The plots' names come from the chain's variables, known only later;
            // each is still refused if something other than a file has its name.
            if (!o.plot.empty())
                require_writable_folder(o.plot + "-x.png");
            if (r.store)
                if (const std::string there = io::unreplaceable(r.result_path); !there.empty())
                    throw UsageError("the result '" + r.result_path + "' is " + there +
                                     ": its summary cannot be stored (use --no-store)");
        },
        outputs);

    const SummaryReport report = run_summary(comm, r);

    agree_on_local_work(comm, [&] {
        if (comm_rank(comm) != 0)
            return;
        if (!o.json.empty() && o.json != to_stdout)
            write_text_file(o.json, summary_json(report).dump(2) + "\n");
        if (!o.csv.empty() && o.csv != to_stdout)
            write_text_file(o.csv, summary_csv(report));
        if (!o.plot.empty())
            (void)write_summary_plots(report, o.plot);
        if (!o.report.empty())
            write_summary_html(report, o.report);
    });
    if (comm_rank(comm) == 0) {
        if (o.json == to_stdout)
            std::printf("%s\n", summary_json(report).dump(2).c_str());
        else if (o.csv == to_stdout)
            std::printf("%s", summary_csv(report).c_str());
        else
            std::printf("%s", summary_text(report).c_str());
        std::fflush(stdout);
    }
    return 0;
}

} // namespace

Action add_summarize(CLI::App& app) {
    auto o = std::make_shared<SummarizeOptions>();
    auto* sub = app.add_subcommand(
        "summarize",
        "Turn a solved result into the numbers a study needs: for every state variable and\n"
        "measure its mean, standard deviation, quantiles and tail P(X >= x); probabilities\n"
        "of conditions; conditional means; the long-run rate of every labelled event; the\n"
        "most likely states. Everything is printed, and stored in the result file under\n"
        "/summary (the file is rewritten whole under a temporary name; --no-store leaves it\n"
        "as it is). The chain is the one named in the result (or --chain).\n"
        "  longrun summarize result.h5\n"
        "  longrun summarize result.h5 --measure \"load=waiting+busy\" --quantile load:0.9999\n"
        "  longrun summarize result.h5 --tail \"full=waiting==capacity\" --tail \"load>=40\"\n"
        "  longrun summarize result.h5 --given \"busy==servers\" --rate "
        "\"lost=drop/(drop+admit)\"\n"
        "  longrun summarize result.h5 --json summary.json --csv - > summary.csv\n"
        "  longrun summarize result.h5 --plot plots/queue --report queue.html\n"
        "Expressions use the chain's state variables, its measures, earlier --measure names\n"
        "and the model's parameters (chains made by `longrun generate`), with + - * / ^,\n"
        "comparisons (== != < <= > >=), && || and !, min, max, abs, floor, ceil and %.\n"
        "A condition is true where it is not 0. --rate expressions use event names, each\n"
        "standing for its long-run rate (per unit time for a ctmc, per step for a dtmc).");
    sub->footer("Exit codes: 0 done, 1 usage error (bad expression, unknown name), 2 bad input\n"
                "(unreadable result or chain, or a chain that does not match), 6 output not "
                "written.");
    sub->add_option("result", o->request.result_path, "result file written by `longrun solve`")
        ->required();
    sub->add_option("--chain", o->chain,
                    "the chain file that was solved (default: the path recorded in the result, "
                    "or a file of that name beside the result)");
    sub->add_option("--measure", o->request.measures,
                    "NAME=EXPRESSION: a quantity per state, summarized like a state variable")
        ->type_name("NAME=EXPR");
    sub->add_option("--tail", o->request.tails,
                    "a condition whose long-run probability is wanted, e.g. \"load>=40\"; with "
                    "NAME= in front it is reported (and usable in sweeps) as P(NAME)")
        ->type_name("[NAME=]COND");
    sub->add_option("--quantile", o->request.quantiles,
                    "another quantile level for one measure (load:0.9999) or for all (0.9999); "
                    "50, 90, 99 and 99.9 % are always given")
        ->type_name("[NAME:]LEVEL");
    sub->add_option("--given", o->request.given,
                    "a condition: every measure's mean given it, E[X | COND], and P(COND)")
        ->type_name("COND");
    sub->add_option("--rate", o->request.rates,
                    "NAME=EXPRESSION over event rates, e.g. \"lost=drop/(drop+admit)\" (the "
                    "fraction of arrivals lost)")
        ->type_name("NAME=EXPR");
    sub->add_option("--top", o->request.top, "list this many most likely states")
        ->default_val(10)
        ->check(whole_number_in(0, 100000));
    sub->add_option("--json", o->json, "write everything as JSON to FILE, or '-' for stdout")
        ->type_name("FILE|-");
    sub->add_option("--csv", o->csv,
                    "write kind,name,statistic,value,error_bound,resolved rows (one number each) "
                    "to FILE or '-'")
        ->type_name("FILE|-");
    sub->add_option("--plot", o->plot,
                    "write PREFIX-<measure>.png and .svg (the distribution, and the tail "
                    "P(X >= x) on a log scale with the quantiles marked) and "
                    "PREFIX-residuals.png/.svg (the solve's residual history)")
        ->type_name("PREFIX");
    sub->add_option("--report", o->report,
                    "write one self-contained HTML file (plots embedded, nothing fetched) with "
                    "the model, the certificate, every table and every plot, to mail to a "
                    "colleague")
        ->type_name("FILE.html");
    sub->add_flag("--no-store", o->no_store, "do not write /summary into the result file");
    sub->add_flag("-q,--quiet", o->quiet, "no progress lines on stderr");
    return [o](MPI_Comm comm) { return summarize_command(comm, *o); };
}

} // namespace longrun::cli

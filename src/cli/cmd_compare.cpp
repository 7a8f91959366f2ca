// `longrun compare`: several methods on several chains, same tolerance, side by side.
#include "commands.hpp"
#include "compare_job.hpp"
#include "compare_plots.hpp"
#include "compare_report.hpp"
#include "option_range.hpp"
#include "paths.hpp"
#include "text_file.hpp"

#include "io/mpi_agree.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cstdio>
#include <memory>

namespace longrun::cli {

namespace {

struct CompareOptions {
    CompareRequest request;
    std::string methods = "all";
    std::string kind;
    std::string preconditioner = "amg";
    std::string json, csv, plot;
    bool quiet = false;
};

constexpr const char* to_stdout = "-";

std::vector<std::string> output_files(const CompareOptions& o,
                                      const std::vector<std::string>& plot_files) {
    std::vector<std::string> files;
    for (const auto* f : {&o.json, &o.csv})
        if (!f->empty() && *f != to_stdout)
            files.push_back(*f);
    for (const auto& name : plot_files)
        for (const char* ext : {".png", ".svg"})
            files.push_back(name + ext);
    return files;
}

int compare_command(MPI_Comm comm, CompareOptions& o) {
    auto& r = o.request;
    r.methods = parse_method_list(o.methods);
    if (o.json == to_stdout && o.csv == to_stdout)
        throw UsageError("--json - and --csv - would both print on stdout: send one to a file");
    for (std::size_t i = 0; i < r.chains.size(); ++i)
        if (std::find(r.chains.begin(), r.chains.begin() + static_cast<std::ptrdiff_t>(i),
                      r.chains[i]) != r.chains.begin() + static_cast<std::ptrdiff_t>(i))
            throw UsageError("chain '" + r.chains[i] + "' is given twice");
    if (!o.kind.empty())
        r.kind = io::parse_kind(o.kind);
    r.preconditioner = solve::preconditioner_named(o.preconditioner);
    r.progress = !o.quiet;
    const std::vector<std::string> plot_files =
        o.plot.empty() ? std::vector<std::string>{} : plot_names(o.plot, r.chains);
    const auto outputs = output_files(o, plot_files);
    // Hours of solving should not end in "cannot write": try the folders first.
    agree_on_outputs(
        comm,
        [&] {
            for (const auto& out : outputs) {
                for (const auto& chain : r.chains)
                    require_distinct(chain, out);
                require_output_file(out);
            }
        },
        outputs);

    const CompareReport report = run_compare(comm, r);

    std::vector<std::string> plots;
    agree_on_local_work(comm, [&] {
        if (comm_rank(comm) != 0)
            return;
        if (!o.json.empty() && o.json != to_stdout)
            write_text_file(o.json, compare_json(report).dump(2) + "\n");
        if (!o.csv.empty() && o.csv != to_stdout)
            write_text_file(o.csv, compare_csv(report));
        if (!plot_files.empty())
            plots = write_compare_plots(report, plot_files); // PLplot: rank 0 only
    });
    if (comm_rank(comm) == 0) {
        if (o.json == to_stdout)
            std::printf("%s\n", compare_json(report).dump(2).c_str());
        else if (o.csv == to_stdout)
            std::printf("%s", compare_csv(report).c_str());
        else {
            std::string text = compare_text(report);
            for (const auto& f : plots)
                text += "plot         " + f + "\n";
            std::printf("%s", text.c_str());
        }
        std::fflush(stdout);
    }
    return 0;
}

} // namespace

Action add_compare(CLI::App& app) {
    auto o = std::make_shared<CompareOptions>();
    std::string names;
    for (const auto& n : comparable_methods())
        names += (names.empty() ? "" : ", ") + n;
    auto* sub = app.add_subcommand(
        "compare",
        "Run several methods on several chains with the same tolerance and set them side by\n"
        "side: iterations, matrix-vector products, time, memory and the certified residual of\n"
        "each (chain, method). Every method runs alone from the same cold start, with no\n"
        "fallback; a method that misses the tolerance is a result (exit 0), not an error.\n"
        "  longrun compare tandem.h5 walk.mtx --methods linear,eigen\n"
        "  mpirun -n 4 longrun compare big.h5 --methods all --tol 1e-12 --json runs.json\n"
        "  longrun compare a.h5 b.h5 --csv - > runs.csv             (CSV on stdout)\n"
        "  longrun compare rates.mtx --kind ctmc --plot plots/rates  (plots/rates-rates.png, "
        ".svg)\n"
        "  longrun compare a.h5 --methods linear -- -linear_ksp_type bcgs\n"
        "Columns: conv (certified residual <= --tol), iters (the method's own iterations),\n"
        "products (PETSc products with the chain's matrix; those inside hypre or MUMPS are not\n"
        "counted), prod-equiv (wall seconds divided by the time of one product, timed before\n"
        "the runs: a machine-independent cost), seconds (wall), peak MiB (the process's peak\n"
        "resident memory after the run, largest rank: it never goes down, so a run that needs\n"
        "less than an earlier one shows the earlier peak; JSON and CSV also give\n"
        "peak_memory_increase_bytes, how much the run raised it), residual (the certificate\n"
        "of the method's best iterate) and the outcome line. Methods that are not available\n"
        "or decline the chain are 'skipped: ...' rows, and so are all methods on a chain\n"
        "without a unique stationary distribution.\n"
        "Inputs: chain files (.h5) and Matrix Market files (.mtx, rows = source states),\n"
        "read whole by every rank (convert large ones to a chain file first). A Matrix Market\n"
        "file's kind is told from its rows: rows summing to 0 with a negative diagonal are a\n"
        "ctmc generator, rows summing to 1 a dtmc; anything else is refused (exit 2) unless\n"
        "--kind says. Files that store the transposed matrix (column j holds the transitions\n"
        "out of state j) are read with --transposed.");
    sub->footer("Exit codes: 0 done (also when some method did not converge), 1 usage error,\n"
                "2 bad input, 6 output not written.");
    sub->add_option("chains", o->request.chains, "chain files (.h5) and Matrix Market files (.mtx)")
        ->required()
        ->expected(1, -1);
    sub->add_option("--methods", o->methods, "comma-separated methods, or all (" + names + ")")
        ->type_name("LIST")
        ->default_val("all");
    sub->add_option("--tol", o->request.tolerance,
                    "the estimated error ||pi_hat - pi||_1 a run must reach to count as "
                    "converged, the same for every run, in (0, 1e-2]")
        ->default_val(1e-10)
        ->check(number_in(Interval::open_closed(0, 1e-2)));
    sub->add_option("--kind", o->kind,
                    "ctmc or dtmc, for Matrix Market files (chain files say their kind); "
                    "without it the kind is told from the row sums")
        ->check(CLI::IsMember({"ctmc", "dtmc"}));
    sub->add_flag("--transposed", o->request.transposed,
                  "the Matrix Market files hold the transposed matrix (P^T or Q^T): column j "
                  "lists the transitions out of state j, so columns, not rows, sum to 1 (or 0); "
                  "chain files are not affected");
    sub->add_option("--json", o->json, "write the comparison as JSON to FILE, or '-' for stdout")
        ->type_name("FILE|-");
    sub->add_option("--csv", o->csv,
                    "write one CSV row per (chain, method), with a header row, to FILE or '-'")
        ->type_name("FILE|-");
    sub->add_option("--plot", o->plot,
                    "write PREFIX-<chain>.png and .svg per chain: residual (log) against wall "
                    "time, one line per method")
        ->type_name("PREFIX");
    sub->add_option("--max-seconds", o->request.max_seconds,
                    "start no run after this many seconds (a run already going is finished); "
                    "the rest are 'skipped' rows. 0: no limit")
        ->default_val(0)
        ->check(number_in(Interval::closed(0, longest_seconds)));
    sub->add_option("--preconditioner", o->preconditioner,
                    "for linear: amg (hypre BoomerAMG), ilu (block-Jacobi/ILU(0)), asm (additive "
                    "Schwarz, ILU(0) on overlapping blocks), lu (MUMPS)")
        ->default_val("amg")
        ->check(CLI::IsMember({"amg", "ilu", "asm", "lu"}));
    sub->add_option("--timing-products", o->request.timing_products,
                    "products timed per chain to measure one product's time")
        ->default_val(10)
        ->check(whole_number_in(1, 100000));
    add_validation_options(sub, o->request.validation);
    sub->add_flag("-q,--quiet", o->quiet, "no progress lines on stderr");
    return [o](MPI_Comm comm) { return compare_command(comm, *o); };
}

} // namespace longrun::cli

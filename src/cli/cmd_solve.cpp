// `longrun solve`: the main job.
#include "commands.hpp"
#include "option_range.hpp"
#include "paths.hpp"
#include "report.hpp"
#include "solver_options.hpp"

#include "io/mpi_agree.hpp"

#include <cstdio>
#include <memory>

namespace longrun::cli {

namespace {

struct SolveOptions {
    SolveRequest request;
    SolverOptions solver;
    std::string output;
    std::string partition = "contiguous";
    bool json = false;
    bool quiet = false;
    std::optional<std::uint64_t> start_state;
    std::optional<std::string> start_distribution;
    std::optional<std::string> warm_start;
    std::optional<std::string> checkpoint;
    std::optional<std::string> resume;
};

// Every usage check that may depend on the rank's view of the file system.
void check_paths(const SolveOptions& o) {
    if (!o.output.empty()) {
        require_distinct(o.request.chain_path, o.output);
        require_output_file(o.output);
    }
    for (const auto* path : {&o.warm_start, &o.checkpoint, &o.resume})
        if (*path)
            require_distinct(o.request.chain_path, **path);
    if (o.checkpoint) {
        if (!o.output.empty())
            require_distinct(o.output, *o.checkpoint);
        require_output_file(*o.checkpoint);
    }
    if (o.resume && !o.checkpoint)
        require_output_file(*o.resume); // checkpoints go on into it
}

int solve_command(MPI_Comm comm, SolveOptions& o) {
    if ((o.start_state || o.start_distribution) && !o.request.per_class)
        throw UsageError("--from and --from-distribution go with --per-class");
    if (o.start_state && o.start_distribution)
        throw UsageError("give either --from or --from-distribution, not both");
    if (o.request.warm_start_other_chain && !o.warm_start)
        throw UsageError("--start-other-chain goes with --start FILE");
    if (o.warm_start && o.resume)
        throw UsageError("give either --start (an earlier result) or --resume (a checkpoint)");
    std::vector<std::string> written;
    if (!o.output.empty())
        written.push_back(o.output);
    if (o.checkpoint || o.resume)
        written.push_back(o.checkpoint ? *o.checkpoint : *o.resume);
    // Hours of solving must not end in "cannot write", on any node.
    agree_on_outputs(
        comm, [&] { check_paths(o); }, written, Writers::every_rank);
    if (!o.output.empty())
        o.request.output = o.output;
    o.request.method = o.solver.method;
    o.request.tolerance = o.solver.tolerance;
    o.request.residual_tolerance = o.solver.residual_tolerance;
    o.request.preconditioner = solve::preconditioner_named(o.solver.preconditioner);
    o.request.partition = *partition::parse_layout(o.partition);
    o.request.progress = !o.quiet;
    o.request.warm_start = o.warm_start;
    o.request.checkpoint = o.checkpoint;
    o.request.resume = o.resume;
    o.request.start_state = o.start_state;
    o.request.start_distribution = o.start_distribution;
    const SolveReport report = run_solve(comm, o.request);
    if (comm_rank(comm) == 0) {
        if (o.json)
            std::printf("%s\n", to_json(report).dump(2).c_str());
        else
            std::printf("%s", to_text(report).c_str());
        std::fflush(stdout);
    }
    return 0;
}

} // namespace

Action add_solve(CLI::App& app) {
    auto o = std::make_shared<SolveOptions>();
    auto* sub = app.add_subcommand(
        "solve",
        "Compute the stationary distribution pi of a chain file and certify it.\n"
        "The certificate is the residual ||pi P - pi||_1 (dtmc) or ||pi Q||_1 / max_i |q_ii|\n"
        "(ctmc); a result is written only when it is within --tol.\n"
        "  longrun solve chain.h5 -o result.h5\n"
        "  mpirun -n 4 longrun solve chain.h5 -o result.h5 --method linear --tol 1e-12\n"
        "Long runs: --checkpoint ck.h5 --checkpoint-every 600, then after a crash or a time\n"
        "limit the same command with --resume ck.h5. Sweeps: --start previous-result.h5\n"
        "--start-other-chain.\n"
        "Methods (--method NAME, or a comma list tried in order; PETSc/SLEPc options after a\n"
        "lone -- with the method's prefix, e.g. -- -linear_ksp_type bcgs):\n" +
            methods_help());
    // Existence is the reader's check, not the parser's: a missing or unreadable
    // input is bad input (exit 2), not a usage error.
    sub->footer("Exit codes: 0 done, 1 usage error, 2 bad input, 3 no unique stationary\n"
                "distribution, 4 no certified answer within tolerance, 6 output not written,\n"
                "7 stopped by SIGTERM/SIGINT (with --checkpoint: resume with --resume).");
    sub->add_option("chain", o->request.chain_path, "chain file (HDF5, longrun.chain v1)")
        ->required();
    sub->add_option("-o,--output", o->output,
                    "result file to write (HDF5); written under a temporary name and renamed "
                    "when complete");
    add_solver_options(sub, o->solver);
    sub->add_option("--partition", o->partition,
                    "rows per rank during the solve: contiguous (blocks of the file's order), "
                    "graph (PT-Scotch on the symmetrised transition graph; rows are moved, "
                    "results stay in file order), auto (contiguous unless its busiest rank "
                    "receives at least 1% of its nonzeros in vector entries per product; then "
                    "graph when that at least halves the entries exchanged without adding "
                    "imbalance). contiguous measures the exchange and says when auto may help")
        ->default_val("contiguous")
        ->check(CLI::IsMember({"auto", "contiguous", "graph"}));
    add_validation_options(sub, o->request.validation);
    sub->add_flag("--no-analysis{false}", o->request.analyse_structure,
                  "skip the structure check (closed classes, period) that runs before solving; "
                  "for chains too large to gather on one rank (over 2^31 - 1 transitions)");
    sub->add_flag("--per-class", o->request.per_class,
                  "when the chain has several closed classes (or absorbing states), solve each "
                  "class on its own instead of stopping with exit 3");
    sub->add_option("--from", o->start_state,
                    "with --per-class: the start state; adds the probability of ending in each "
                    "class and the long-run distribution from that start (/distribution)")
        ->check(whole_number_in(0));
    sub->add_option("--from-distribution", o->start_distribution,
                    "with --per-class: an HDF5 file whose /distribution dataset is the start "
                    "distribution");
    sub->add_option("--start", o->warm_start,
                    "warm start: begin from /distribution of an earlier result (or checkpoint) "
                    "of this chain (its recorded content hash must match; see "
                    "--start-other-chain)")
        ->check([](const std::string& v) -> std::string {
            if (!v.empty() && v.find_first_not_of("0123456789") == std::string::npos)
                return "--start takes a result file to warm-start from; for the start state "
                       "of --per-class use --from " +
                       v;
            return "";
        });
    sub->add_flag("--start-other-chain", o->request.warm_start_other_chain,
                  "let --start begin from a result of another chain with the same number of "
                  "states, e.g. the previous point of a parameter sweep (the certificate still "
                  "judges the answer)");
    sub->add_option("--checkpoint", o->checkpoint,
                    "write the current iterate to this HDF5 file while solving (atomically: a "
                    "crash never leaves a half-written checkpoint)");
    sub->add_option("--checkpoint-every", o->request.checkpoint_every,
                    "seconds between checkpoints")
        ->default_val(300)
        ->check(number_in(Interval::closed(0, longest_seconds)));
    sub->add_option("--resume", o->resume,
                    "continue from this checkpoint if it exists (else start from the beginning, "
                    "and say so); keeps checkpointing into it unless --checkpoint names another "
                    "file. The same command line can thus be resubmitted after a time limit; the "
                    "tolerance and method may differ from the first run");
    sub->add_option("--truncation-warn", o->request.truncation_threshold,
                    "warn when the probability at a state variable's declared bound exceeds "
                    "this (a sign that the bound cuts off real mass)")
        ->default_val(1e-6)
        ->check(number_in(Interval::open_closed(0, 1)));
    sub->add_flag("--json", o->json, "print the report as one JSON object on stdout");
    sub->add_flag("-q,--quiet", o->quiet, "no progress lines on stderr");
    return [o](MPI_Comm comm) { return solve_command(comm, *o); };
}

} // namespace longrun::cli

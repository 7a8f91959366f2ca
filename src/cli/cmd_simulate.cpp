// `longrun simulate`: an independent check of a solve by Monte-Carlo time averages,
// and a way to watch what a chain that is not ergodic does from a given start.
#include "commands.hpp"
#include "option_range.hpp"
#include "paths.hpp"
#include "simulate_job.hpp"
#include "simulate_output.hpp"
#include "text_file.hpp"

#include "io/mpi_agree.hpp"

#include <fmt/format.h>
#include <unistd.h>

#include <chrono>
#include <cstdio>
#include <memory>

namespace longrun::cli {

namespace {

struct SimulateOptions {
    SimulateRequest request;
    std::optional<double> time;
    std::optional<std::uint64_t> steps;
    std::string from, against, json;
    bool per_replication = false;
    bool quiet = false;
};

constexpr const char* to_stdout = "-";

// Every replication's estimates travel to rank 0 and are kept there.
constexpr std::uint64_t most_replications = 100000;

// Rank 0's replications as they finish, once the run has lasted a second (short
// runs stay quiet); on a terminal at most one line a second.
class ReplicationProgress {
  public:
    ReplicationProgress(bool enabled, std::uint64_t of, std::string unit)
        : enabled_(enabled), terminal_(isatty(fileno(stderr)) != 0), of_(of),
          unit_(std::move(unit)), start_(Clock::now()), last_(start_ - std::chrono::hours(1)) {}
    void operator()(const simulate::ReplicationResult& r) {
        const auto now = Clock::now();
        if (!enabled_ || now - start_ < std::chrono::seconds(1) ||
            (terminal_ && now - last_ < std::chrono::seconds(1)))
            return;
        last_ = now;
        std::fprintf(stderr, "%s\n", replication_line(r, of_, unit_).c_str());
        std::fflush(stderr);
    }

  private:
    using Clock = std::chrono::steady_clock;
    bool enabled_, terminal_;
    std::uint64_t of_;
    std::string unit_;
    Clock::time_point start_, last_;
};

int simulate_command(MPI_Comm comm, SimulateOptions& o) {
    auto& r = o.request;
    r.length.time = o.time;
    r.length.steps = o.steps;
    if (!o.from.empty())
        r.from = o.from;
    if (!o.against.empty()) {
        r.against = o.against;
        require_distinct(r.chain_path, o.against);
    }
    if (!o.json.empty() && o.json != to_stdout)
        agree_on_outputs(comm,
                         [&] {
                             require_distinct(r.chain_path, o.json);
                             if (r.against)
                                 require_distinct(*r.against, o.json);
                             require_output_file(o.json);
                         },
                         {o.json});
    auto progress = std::make_shared<ReplicationProgress>(
        !o.quiet && comm_rank(comm) == 0, r.replications, o.time ? "time" : "steps");
    r.on_replication = [progress](const simulate::ReplicationResult& x) { (*progress)(x); };

    const SimulateReport report = run_simulation(comm, r);

    const bool per_replication = o.per_replication || report.replications.size() <= 8;
    agree_on_local_work(comm, [&] {
        if (comm_rank(comm) == 0 && !o.json.empty() && o.json != to_stdout)
            write_text_file(o.json, simulate_json(report, r).dump(2) + "\n");
    });
    if (comm_rank(comm) == 0) {
        if (o.json == to_stdout)
            std::printf("%s\n", simulate_json(report, r).dump(2).c_str());
        else
            std::printf("%s", simulate_text(report, r, per_replication).c_str());
        std::fflush(stdout);
    }
    return report.exit_code;
}

} // namespace

Action add_simulate(CLI::App& app) {
    auto o = std::make_shared<SimulateOptions>();
    auto* sub = app.add_subcommand(
        "simulate",
        "Check a chain by simulation, sharing no code with the solvers. Each replication\n"
        "runs the chain from a start state (a dtmc step by step; a ctmc with exponential\n"
        "holding times) and estimates, for every state variable and measure, its time\n"
        "average, and for every event its long-run rate (per unit time for a ctmc, per step\n"
        "for a dtmc), each with a batch-means confidence interval. Replications use\n"
        "independent random streams fixed by --seed and are spread over the MPI ranks; the\n"
        "numbers do not depend on how many ranks run them.\n"
        "If the replications' time averages differ by more than chance allows, each has\n"
        "settled in a different part of the chain: the chain is not ergodic from this start,\n"
        "and the command says so and shows where each replication ended instead of pooling.\n"
        "With --against it compares the pooled estimates with a solved result (the values\n"
        "`summarize` reports) and flags every solved value outside its interval. With m\n"
        "quantities compared, each interval is widened to the level 1 - (1 - c)/m\n"
        "(Bonferroni), so that a correct solve is flagged with probability at most 1 - c.\n"
        "  longrun simulate chain.h5 --time 1e5 --replications 8 --seed 7\n"
        "  longrun simulate chain.h5 --time 1e5 --warmup 1e3 --against result.h5\n"
        "  mpirun -n 4 longrun simulate chain.h5 --steps 100000000 --replications 16 --json -\n"
        "  longrun simulate chain.h5 --time 1e4 --replications 6 --from \"q1=0,q2=5\"\n"
        "Run lengths: a longer run narrows each interval like 1/sqrt(length); a run much\n"
        "shorter than the chain's mixing time gives intervals that are too narrow.");
    sub->footer("Exit codes: 0 done (and with --against: every solved value within its "
                "interval),\n1 usage error (bad option, unknown start state, --time on a dtmc), 2 "
                "bad input\n(unreadable chain or result, or a result of another chain), 5 the "
                "simulation\ndisagrees with --against (or the chain is not ergodic from the "
                "start, so no\nsingle solved distribution describes it), 6 output not written.");
    sub->add_option("chain", o->request.chain_path, "chain file (HDF5, from convert or generate)")
        ->required();
    auto* time = sub->add_option("--time", o->time,
                                 "simulated time per replication (ctmc), after the warm-up")
                     ->type_name("T")
                     ->check(number_in(Interval::above(0)));
    auto* steps = sub->add_option("--steps", o->steps,
                                  "transitions per replication (dtmc, or a ctmc counted in "
                                  "jumps), after the warm-up")
                      ->type_name("N")
                      ->check(whole_number_in(1));
    time->excludes(steps);
    steps->excludes(time);
    sub->add_option("--replications", o->request.replications,
                    "independent runs, spread over the ranks (replication r on rank r % ranks); "
                    "2 or more test whether the chain is ergodic from the start")
        ->default_val(4)
        ->type_name("R")
        ->check(whole_number_in(1, most_replications));
    sub->add_option("--seed", o->request.seed,
                    "the random streams: the same seed gives the same numbers on any number of "
                    "ranks")
        ->default_val(1)
        ->check(whole_number_in(0));
    sub->add_option("--warmup", o->request.length.warmup,
                    "discarded at the start of each replication, in the run length's unit "
                    "(time with --time, steps with --steps)")
        ->default_val(0)
        ->type_name("W")
        ->check(number_in(Interval::at_least(0)));
    sub->add_option("--from", o->from,
                    "start state: its index, or values of state variables that exactly one "
                    "state has, e.g. \"q1=0,q2=5\" (default: state 0)")
        ->type_name("STATE");
    sub->add_option("--against", o->against,
                    "a result file of this chain (from `longrun solve`): compare; exit 5 when "
                    "any solved value lies outside its interval")
        ->type_name("RESULT.h5");
    sub->add_option("--confidence", o->request.confidence,
                    "level of each interval; with --against, the level for all comparisons "
                    "together")
        ->default_val(0.95)
        ->check(number_in(Interval::open(0, 1)));
    sub->add_option("--json", o->json, "write everything as JSON to FILE, or '-' for stdout")
        ->type_name("FILE|-");
    sub->add_flag("--per-replication", o->per_replication,
                  "a table per replication even when there are more than 8");
    sub->add_flag("-q,--quiet", o->quiet, "no progress lines on stderr");
    add_validation_options(sub, o->request.validation);
    return [o](MPI_Comm comm) { return simulate_command(comm, *o); };
}

} // namespace longrun::cli

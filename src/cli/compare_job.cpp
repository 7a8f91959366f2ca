#include "compare_job.hpp"

#include "chain_input.hpp"
#include "matrix_market_kind.hpp"
#include "solve_pipeline.hpp"
#include "structure_report.hpp"

#include "analysis/structure.hpp"
#include "io/mpi_agree.hpp"
#include "solve/assemble.hpp"
#include "solve/petsc_error.hpp"

#include <fmt/format.h>

#include <sys/resource.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <sstream>

namespace longrun::cli {

namespace {

using Clock = std::chrono::steady_clock;

double seconds_since(Clock::time_point start) {
    return std::chrono::duration<double>(Clock::now() - start).count();
}

// This process's resident-set high-water mark. It only ever grows, so a run's
// own peak cannot be told apart once an earlier run went higher.
std::uint64_t own_peak_bytes() {
    struct rusage usage {};
    getrusage(RUSAGE_SELF, &usage);
    return static_cast<std::uint64_t>(usage.ru_maxrss) * 1024; // Linux: KiB
}

std::uint64_t largest_over_ranks(MPI_Comm comm, std::uint64_t mine) {
    std::uint64_t largest = 0;
    MPI_Allreduce(&mine, &largest, 1, MPI_UINT64_T, MPI_MAX, comm);
    return largest;
}

// Rank 0's clock decides, so that every rank skips the same runs.
bool agreed(MPI_Comm comm, bool rank0_says) {
    int flag = rank0_says ? 1 : 0;
    MPI_Bcast(&flag, 1, MPI_INT, 0, comm);
    return flag != 0;
}

// Time of one product with the chain's matrix: the unit in which methods of
// different kinds (Krylov, multigrid, elimination) can be set side by side.
double product_seconds(MPI_Comm comm, const solve::TransposedChain& a, int count) {
    solve::VecHandle x = solve::create_state_vector(a), y = solve::create_state_vector(a);
    solve::check(VecSet(x, 1.0 / static_cast<double>(std::max<PetscInt>(a.states, 1))), "VecSet");
    // The first product pays for setting up the ghost exchange and page faults.
    solve::check(MatMult(a.matrix, x, y), "MatMult");
    MPI_Barrier(comm);
    const auto start = Clock::now();
    for (int i = 0; i < count; ++i)
        solve::check(MatMult(a.matrix, x, y), "MatMult");
    MPI_Barrier(comm);
    double mine = seconds_since(start) / std::max(count, 1), slowest = 0;
    MPI_Allreduce(&mine, &slowest, 1, MPI_DOUBLE, MPI_MAX, comm);
    return slowest;
}

std::optional<io::ChainKind> kind_for(MPI_Comm comm, const std::string& path,
                                      const CompareRequest& request, bool& detected) {
    detected = false;
    if (!is_matrix_market(path))
        return std::nullopt;
    if (request.kind)
        return request.kind;
    io::ChainKind kind = io::ChainKind::ctmc;
    agree_on_local_work(comm, [&] {
        if (comm_rank(comm) == 0)
            kind = matrix_market_kind(path, request.transposed);
    });
    int k = kind == io::ChainKind::ctmc ? 0 : 1;
    MPI_Bcast(&k, 1, MPI_INT, 0, comm);
    detected = true;
    return k == 0 ? io::ChainKind::ctmc : io::ChainKind::dtmc;
}

CompareRun skipped_run(const std::string& chain, const std::string& method,
                       const std::string& why) {
    CompareRun run;
    run.chain = chain;
    run.method = method;
    run.status = RunStatus::skipped;
    run.outcome = "skipped: " + why;
    return run;
}

CompareRun one_run(MPI_Comm comm, const CompareChain& chain, const solve::TransposedChain& a,
                   const std::string& method, const solve::MethodSettings& settings,
                   const solve::ChainTraits& traits) {
    CompareRun run;
    run.chain = chain.path;
    run.method = method;
    const std::uint64_t before = own_peak_bytes();
    const auto start = Clock::now();
    try {
        const solve::SolveOutcome outcome = solve::solve_stationary(a, method, settings, traits);
        const solve::AttemptRecord& record = outcome.attempts.front();
        run.iterations = record.iterations;
        run.matvecs = record.matvecs;
        run.outcome = record.outcome;
        run.history = record.history;
        run.history_seconds = record.history_seconds;
        if (record.outcome.starts_with("skipped:")) {
            run.status = RunStatus::skipped;
        } else if (record.outcome.starts_with("failed:")) {
            run.status = RunStatus::failed;
        } else {
            run.status = record.met ? RunStatus::converged : RunStatus::not_converged;
            if (outcome.pi) {
                run.residual = outcome.certificate.residual;
                if (std::isfinite(outcome.certificate.error_estimate))
                    run.error_estimate = outcome.certificate.error_estimate;
            }
        }
    } catch (const Error& e) {
        // Only errors that every rank throws alike may be turned into a row;
        // anything else leaves ranks inside collective calls: the job must end.
        if (!e.agreed())
            throw;
        run.status = RunStatus::failed;
        run.outcome = std::string("failed: ") + e.what();
    }
    run.seconds = seconds_since(start);
    if (chain.product_seconds > 0)
        run.product_equivalents = run.seconds / chain.product_seconds;
    const std::uint64_t after = own_peak_bytes();
    run.peak_memory_bytes = largest_over_ranks(comm, after);
    run.peak_memory_increase_bytes = largest_over_ranks(comm, after - before);
    return run;
}

} // namespace

std::string to_string(RunStatus status) {
    switch (status) {
    case RunStatus::converged:
        return "converged";
    case RunStatus::not_converged:
        return "not converged";
    case RunStatus::skipped:
        return "skipped";
    case RunStatus::failed:
        return "failed";
    }
    return "?";
}

std::vector<std::string> comparable_methods() {
    std::vector<std::string> names;
    for (const auto& m : solve::method_table())
        names.push_back(m.name);
    return names;
}

std::vector<std::string> parse_method_list(const std::string& text) {
    const auto known = comparable_methods();
    if (text == "all")
        return known;
    std::string all;
    for (const auto& n : known)
        all += (all.empty() ? "" : ", ") + n;
    std::vector<std::string> names;
    std::stringstream in(text);
    std::string name;
    while (std::getline(in, name, ',')) {
        if (name == "auto")
            throw UsageError("compare runs each method alone; 'auto' falls back from one to "
                             "another (choose from " +
                             all + ", or all)");
        if (std::find(known.begin(), known.end(), name) == known.end())
            throw UsageError("unknown method '" + name + "' (choose from " + all + ", or all)");
        if (std::find(names.begin(), names.end(), name) != names.end())
            throw UsageError("method '" + name + "' is listed twice");
        names.push_back(name);
    }
    if (names.empty())
        throw UsageError("no method given (choose from " + all + ", or all)");
    return names;
}

CompareReport run_compare(MPI_Comm comm, const CompareRequest& request) {
    const auto start = Clock::now();
    solve::Progress progress(comm, request.progress);
    if (request.methods.empty())
        throw UsageError("no method given");
    CompareReport report;
    report.tolerance = request.tolerance;
    report.ranks = comm_size(comm);
    report.methods = request.methods;

    // Every input is looked at before the first run: a typo in the last file
    // should not cost the hours spent on the first ones.
    std::vector<std::optional<io::ChainKind>> kinds;
    std::vector<bool> detected;
    for (const auto& path : request.chains) {
        bool d = false;
        kinds.push_back(kind_for(comm, path, request, d));
        detected.push_back(d);
        if (!is_matrix_market(path))
            (void)io::read_chain_header(path, comm);
    }

    for (std::size_t c = 0; c < request.chains.size(); ++c) {
        const std::string& path = request.chains[c];
        LoadedChain loaded =
            load_any_chain(path, comm, kinds[c], request.validation, request.transposed);
        const io::Chain& chain = loaded.chain;
        CompareChain info;
        info.path = path;
        info.kind = chain.kind;
        info.kind_detected = detected[c];
        info.transposed = request.transposed && is_matrix_market(path);
        info.states = chain.states;
        info.transitions = chain.transitions;
        progress.note(fmt::format("{}: {} {} states, {} transitions{}", path,
                                  io::to_string(chain.kind), chain.states, chain.transitions,
                                  info.kind_detected
                                      ? (info.transposed ? " (kind told from the column sums)"
                                                         : " (kind told from the row sums)")
                                  : info.transposed ? " (read transposed)"
                                                    : ""));
        const solve::LocalRows rows = local_rows_of(chain);
        info.residual_definition = solve::residual_definition(rows.time);
        const analysis::Structure structure = analysis::analyse(comm, rows);
        info.structure = describe_structure(comm, chain, structure).verdict;
        info.solvable = structure.unique();
        if (!info.solvable) {
            for (const auto& method : request.methods)
                report.runs.push_back(skipped_run(path, method, info.structure));
            report.chains.push_back(std::move(info));
            continue;
        }
        const solve::TransposedChain a = solve::assemble_transposed(comm, rows);
        info.product_seconds = product_seconds(comm, a, request.timing_products);

        solve::MethodSettings settings;
        settings.tolerance = request.tolerance;
        settings.preconditioner = request.preconditioner;
        settings.progress = &progress;
        const solve::StateCoordinates coordinates = coordinates_of(chain);
        settings.coordinates = &coordinates;
        const solve::ChainTraits traits = traits_of(comm, chain, rows.time, &structure);
        settings.memory_limit_bytes = traits.memory_per_rank_bytes * 8 / 10;

        for (const auto& method : request.methods) {
            const bool over =
                agreed(comm, request.max_seconds > 0 && seconds_since(start) > request.max_seconds);
            if (over) {
                report.runs.push_back(skipped_run(
                    path, method,
                    fmt::format("--max-seconds {:g} spent before this run", request.max_seconds)));
                continue;
            }
            report.runs.push_back(one_run(comm, info, a, method, settings, traits));
        }
        report.chains.push_back(std::move(info));
    }
    report.wall_seconds = seconds_since(start);
    return report;
}

} // namespace longrun::cli

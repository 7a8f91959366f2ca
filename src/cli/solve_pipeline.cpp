#include "solve_pipeline.hpp"

#include "checkpoint.hpp"
#include "io/chain_hash.hpp"
#include "io/hdf5.hpp"
#include "io/iterate_file.hpp"
#include "load.hpp"
#include "solve/assemble.hpp"
#include "solve/per_class.hpp"
#include "stop_signal.hpp"
#include "structure_report.hpp"
#include "summary/reversibility.hpp"

#include <fmt/format.h>

#include <sys/resource.h>
#include <sys/stat.h>

#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>

#ifndef LONGRUN_VERSION
#define LONGRUN_VERSION "dev"
#endif

namespace longrun::cli {

std::uint64_t peak_memory_bytes(MPI_Comm comm) {
    struct rusage usage {};
    getrusage(RUSAGE_SELF, &usage);
    std::uint64_t mine = static_cast<std::uint64_t>(usage.ru_maxrss) * 1024; // Linux: KiB
    std::uint64_t largest = 0;
    MPI_Allreduce(&mine, &largest, 1, MPI_UINT64_T, MPI_MAX, comm);
    return largest;
}

namespace {

std::vector<double> local_entries(Vec x) {
    PetscInt n = 0;
    solve::check(VecGetLocalSize(x, &n), "VecGetLocalSize");
    const PetscScalar* v = nullptr;
    solve::check(VecGetArrayRead(x, &v), "VecGetArrayRead");
    std::vector<double> out(v, v + n);
    solve::check(VecRestoreArrayRead(x, &v), "VecRestoreArrayRead");
    return out;
}

io::ResultContent result_content(const SolveReport& r, const std::string& chain_path) {
    io::ResultContent c;
    c.origin.chain_path = chain_path;
    c.origin.tool_version = LONGRUN_VERSION;
    c.origin.kind = io::to_string(r.kind);
    c.origin.chain_hash = r.chain_hash;
    c.origin.chain_hash_method = io::chain_hash_method;
    struct stat st {};
    if (::stat(chain_path.c_str(), &st) == 0) {
        c.origin.chain_bytes = static_cast<std::uint64_t>(st.st_size);
        c.origin.chain_mtime = static_cast<std::int64_t>(st.st_mtime);
    }
    auto& cert = c.certificate;
    cert.method = r.method;
    for (const auto& a : r.attempts)
        cert.trace.push_back(fmt::format("{}: {} ({} iterations, {} products, {:.2f} s)", a.method,
                                         a.outcome, a.iterations, a.matvecs, a.seconds));
    if (!r.start_from.empty())
        cert.trace.insert(cert.trace.begin(), "start: " + r.start_from);
    cert.iterations = static_cast<std::uint64_t>(r.iterations);
    cert.residual = r.certificate.residual;
    cert.tolerance = r.tolerance;
    cert.residual_tolerance = r.residual_tolerance;
    cert.error_estimate = r.certificate.error_estimate;
    cert.error_estimate_method = r.certificate.error_estimate_method;
    cert.norm_error = r.certificate.norm_error;
    cert.min_entry = r.certificate.min_entry;
    cert.clipped_mass = r.certificate.clipped_mass;
    cert.wall_seconds = r.wall_seconds;
    cert.peak_memory_bytes = r.peak_memory_bytes;
    cert.ranks = r.ranks;
    cert.converged = r.certified();
    cert.residual_definition = r.residual_definition;
    cert.detailed_balance_violation = r.detailed_balance_violation;
    c.has_distribution = r.has_distribution;
    if (!r.classes.empty()) {
        io::ClassesRecord rec;
        for (const auto& k : r.classes) {
            rec.sizes.push_back(k.size);
            rec.periods.push_back(k.period);
            rec.residuals.push_back(k.residual);
            if (k.probability)
                rec.absorption.push_back(*k.probability);
        }
        rec.start = r.start_description;
        c.classes = rec;
    }
    int index = 1;
    for (const auto& a : r.attempts)
        c.history.push_back({fmt::format("{}-{}", index++, a.method), a.history});
    for (const auto& m : r.variables) {
        io::DistributionSummary s;
        s.name = m.name;
        s.integral = m.integral;
        s.values = m.values;
        s.pmf = m.pmf;
        s.tail = m.tail;
        s.mean = m.mean;
        s.std = m.std;
        s.q50 = m.q50;
        s.q90 = m.q90;
        s.q99 = m.q99;
        s.q999 = m.q999;
        for (const auto& note : r.truncation)
            if (note.variable == m.name)
                (note.upper ? s.mass_at_upper : s.mass_at_lower) = note.mass;
        c.variables.push_back(std::move(s));
    }
    return c;
}

Error uncertified(const SolveRequest& request, const SolveReport& report,
                  const std::vector<solve::AttemptRecord>& attempts, const std::string& what = "") {
    std::string why;
    for (const auto& at : attempts)
        why += (why.empty() ? "" : "; ") + at.method + " " + at.outcome;
    const std::string target =
        request.residual_tolerance > 0
            ? fmt::format("residual {} <= {:.1e}", report.residual_definition,
                          request.residual_tolerance)
            : fmt::format("estimated error ||pi_hat - pi||_1 <= {:.1e}", request.tolerance);
    Error failure(ExitCode::numerical,
                  fmt::format("{}: no method reached the certificate, {}{} ({})",
                              request.chain_path, target, what, why));
    // The certificate is a global reduction, so every rank throws this same error;
    // unagreed, the front end would print it once per rank and abort the job.
    failure.mark_agreed();
    return failure;
}

// This rank's part of the start distribution (full chain order).
std::vector<double> start_vector(MPI_Comm comm, const SolveRequest& request, const io::Chain& chain,
                                 std::string& description) {
    std::vector<double> start(chain.local_rows(), 0.0);
    if (request.start_state) {
        const auto s = *request.start_state;
        if (s >= chain.states) {
            Error e(ExitCode::usage, fmt::format("--from {} is not a state of {} (0..{})", s,
                                                 request.chain_path, chain.states - 1));
            e.mark_agreed();
            throw e;
        }
        if (chain.rows.contains(s))
            start[s - chain.rows.begin] = 1.0;
        description = fmt::format("state {}", s);
        return start;
    }
    const std::string& file = *request.start_distribution;
    std::optional<LocalFault> fault;
    try {
        h5::Handle f = h5::open_for_reading(file, std::nullopt);
        h5::Handle d = h5::open_dataset(f, "/distribution", file);
        const auto n = h5::length_1d(d, file, "/distribution");
        if (n != chain.states)
            h5::fail(
                h5::Side::reading, file,
                fmt::format("/distribution has {} entries, the chain {} states", n, chain.states));
        start = h5::read_range<double>(d, chain.rows.begin, chain.rows.size(), h5::Access::serial,
                                       file, "/distribution");
        for (std::size_t i = 0; i < start.size(); ++i)
            if (!(start[i] >= 0) || !std::isfinite(start[i]))
                h5::fail(h5::Side::reading, file,
                         fmt::format("/distribution: row {}: {} is not a probability",
                                     chain.rows.begin + i, start[i]));
    } catch (const Error& e) {
        fault = LocalFault{chain.rows.begin, e.code(), e.what()};
    }
    agree_or_throw(comm, fault);
    double mine = 0, total = 0;
    for (double x : start)
        mine += x;
    MPI_Allreduce(&mine, &total, 1, MPI_DOUBLE, MPI_SUM, comm);
    if (std::abs(total - 1.0) > 1e-8) {
        Error e(ExitCode::bad_input,
                fmt::format("{}: /distribution sums to {}, not 1", file, total));
        e.mark_agreed();
        throw e;
    }
    description = "distribution from " + file;
    return start;
}

void solve_per_class(MPI_Comm comm, const SolveRequest& request, const io::Chain& chain,
                     const solve::LocalRows& rows, const solve::TransposedChain& a,
                     const solve::MethodSettings& settings, SolveReport& report,
                     io::LocalClassData& class_data) {
    const auto& structure = *report.structure;
    const auto& class_of = structure.class_of;
    const auto position = solve::positions_within_classes(class_of);
    const std::size_t classes = structure.closed.size();
    class_data.class_index.assign(chain.local_rows(), -1);
    class_data.within.assign(chain.local_rows(), 0.0);
    for (std::size_t i = 0; i < chain.local_rows(); ++i) {
        const auto k = class_of[chain.rows.begin + i];
        if (k != solve::transient_class)
            class_data.class_index[i] = k;
    }
    for (std::size_t k = 0; k < classes; ++k) {
        const auto& closed = structure.closed[k];
        ClassOutcome outcome;
        outcome.size = closed.size;
        outcome.period = closed.period;
        outcome.representatives = describe_states(comm, chain, closed.representatives);
        if (closed.size == 1) {
            // An absorbing state: its law is the point mass, exactly.
            outcome.method = "exact";
            const auto v = closed.representatives.front();
            if (chain.rows.contains(v))
                class_data.within[v - chain.rows.begin] = 1.0;
            report.classes.push_back(std::move(outcome));
            continue;
        }
        const solve::ClassChain sub =
            solve::restrict_to_class(comm, rows, class_of, position, static_cast<std::uint32_t>(k));
        const solve::TransposedChain sub_a = solve::assemble_transposed(comm, sub.rows());
        settings.progress->note(fmt::format("class {}: {} states", k + 1, closed.size));
        solve::MethodSettings class_settings = settings;
        class_settings.coordinates = nullptr; // they describe the whole chain's rows
        solve::SolveOutcome result = solve::solve_stationary(sub_a, request.method, class_settings);
        if (!result.met)
            throw uncertified(request, report, result.attempts,
                              fmt::format(" for closed class {}", k + 1));
        const auto local = local_entries(result.pi);
        for (std::size_t i = 0; i < sub.local_states.size(); ++i)
            class_data.within[sub.local_states[i] - chain.rows.begin] = local[i];
        outcome.method = result.method;
        outcome.iterations = result.iterations;
        outcome.residual = result.certificate.residual;
        outcome.error_estimate = result.certificate.error_estimate;
        report.iterations += result.iterations;
        report.attempts.insert(report.attempts.end(), result.attempts.begin(),
                               result.attempts.end());
        report.classes.push_back(std::move(outcome));
    }
    report.method = "per-class";
    if (!request.start_state && !request.start_distribution) {
        report.has_distribution = false;
        report.certificate.valid = true;
        report.certificate.error_estimate = 0;
        for (const auto& c : report.classes) {
            report.certificate.residual = std::max(report.certificate.residual, c.residual);
            report.certificate.error_estimate =
                std::max(report.certificate.error_estimate, c.error_estimate);
        }
        report.certificate.error_estimate_method = "per class: the largest class estimate";
        return;
    }
    const auto start = start_vector(comm, request, chain, report.start_description);
    const solve::Absorption absorption =
        solve::absorption_probabilities(comm, a, rows, class_of, classes, start, settings);
    report.absorption_iterations = absorption.iterations;
    report.absorption_residual = absorption.residual;
    for (std::size_t k = 0; k < classes; ++k)
        report.classes[k].probability = absorption.probability[k];
    // The mixture is stationary for the whole chain (each class's law is): certify
    // it against the full matrix like any other answer.
    report.local_pi.assign(chain.local_rows(), 0.0);
    for (std::size_t i = 0; i < chain.local_rows(); ++i)
        if (class_data.class_index[i] >= 0)
            report.local_pi[i] =
                absorption.probability[class_data.class_index[i]] * class_data.within[i];
    solve::VecHandle x = solve::create_state_vector(a);
    {
        PetscScalar* xv = nullptr;
        solve::check(VecGetArray(x, &xv), "VecGetArray");
        std::copy(report.local_pi.begin(), report.local_pi.end(), xv);
        solve::check(VecRestoreArray(x, &xv), "VecRestoreArray");
    }
    report.certificate = solve::certify(a, x);
    // The mixture's error is at most the largest class error plus the error of
    // the absorption probabilities, which is not estimated: their solve's
    // relative residual stands in for it (the method name says so).
    double largest = 0;
    for (const auto& c : report.classes)
        largest = std::max(largest, c.error_estimate);
    if (report.certificate.valid) {
        report.certificate.error_estimate = largest + absorption.residual;
        report.certificate.error_estimate_method =
            "per class: largest class estimate plus the absorption solve's relative residual";
    }
    if (!report.certificate.meets(request.tolerance, request.residual_tolerance))
        throw uncertified(request, report, report.attempts, " for the mixture");
    report.local_pi = local_entries(x);
}

// MemAvailable shared by the ranks on this node (an upper bound per rank when
// ranks span nodes); 0 when unknown.
std::uint64_t available_memory_per_rank(MPI_Comm comm) {
    std::uint64_t kib = 0;
    if (comm_rank(comm) == 0) {
        std::FILE* f = std::fopen("/proc/meminfo", "r");
        if (f) {
            char line[256];
            while (std::fgets(line, sizeof line, f))
                if (std::sscanf(line, "MemAvailable: %lu kB", &kib) == 1)
                    break;
            std::fclose(f);
        }
    }
    MPI_Bcast(&kib, 1, MPI_UINT64_T, 0, comm);
    return kib * 1024 / static_cast<std::uint64_t>(comm_size(comm));
}

// A lower bound of 0 on an integer variable is taken as natural (an empty queue,
// no busy servers), not as a cut: its mass is reported but never warned about.
void check_truncation(const io::StateVariable& v, const summary::Marginal& m, double threshold,
                      SolveReport& report) {
    auto mass_at = [&](double value) {
        for (std::size_t i = 0; i < m.values.size(); ++i)
            if (m.values[i] == value)
                return m.pmf[i];
        return 0.0;
    };
    if (v.lower) {
        const double mass = mass_at(*v.lower);
        const bool natural = v.integral && *v.lower == 0;
        report.truncation.push_back({v.name, false, *v.lower, mass, !natural && mass > threshold});
    }
    if (v.upper) {
        const double mass = mass_at(*v.upper);
        report.truncation.push_back({v.name, true, *v.upper, mass, mass > threshold});
    }
}

} // namespace

solve::StateCoordinates coordinates_of(const io::Chain& chain) {
    solve::StateCoordinates coordinates;
    for (const auto& v : chain.variables)
        if (v.integral) {
            coordinates.names.push_back(v.name);
            coordinates.values.emplace_back(v.values.begin(), v.values.end());
        }
    return coordinates;
}

solve::ChainTraits traits_of(MPI_Comm comm, const io::Chain& chain, solve::TimeModel time,
                             const analysis::Structure* structure) {
    solve::ChainTraits traits;
    traits.states = chain.states;
    traits.transitions = chain.transitions;
    traits.time = time;
    traits.ranks = comm_size(comm);
    if (structure && !structure->closed.empty()) {
        traits.period = structure->closed.front().period;
        traits.nearly_decomposable = structure->nearly_decomposable();
    }
    traits.memory_per_rank_bytes = available_memory_per_rank(comm);
    return traits;
}

SolveReport run_solve(MPI_Comm comm, const SolveRequest& request) {
    const auto start = std::chrono::steady_clock::now();
    SolveReport report;
    auto phase_start = start;
    const auto phase_done = [&](const char* name) {
        const auto now = std::chrono::steady_clock::now();
        report.phase_seconds.emplace_back(name,
                                          std::chrono::duration<double>(now - phase_start).count());
        phase_start = now;
    };
    solve::Progress progress(comm, request.progress);
    // The method list is checked before any file is touched.
    (void)solve::plan_for(request.method, {});

    LoadedChain loaded =
        load_chain(request.chain_path, comm, request.validation, request.forced_rows);
    const io::Chain& chain = loaded.chain;
    phase_done("read");
    report.chain_path = request.chain_path;
    report.chain_hash = chain.content_hash;
    report.kind = chain.kind;
    report.states = chain.states;
    report.transitions = chain.transitions;
    report.ranks = comm_size(comm);
    report.validation = loaded.validation;
    report.tolerance = request.tolerance;
    report.residual_tolerance = request.residual_tolerance;
    report.rows = chain.rows;
    progress.note(fmt::format("read {}: {} {} states, {} transitions, on {} rank(s) in {:.1f} s",
                              request.chain_path, io::to_string(chain.kind), chain.states,
                              chain.transitions, report.ranks, progress.elapsed_seconds()));
    if (loaded.validation.renormalized_rows > 0)
        progress.note(fmt::format("renormalized {} row(s); largest correction |sum - 1| = {:.3g}",
                                  loaded.validation.renormalized_rows,
                                  loaded.validation.largest_correction));
    if (loaded.validation.ctmc_self_loops > 0)
        progress.note(fmt::format("warning: ignored {} rate(s) from a state to itself",
                                  loaded.validation.ctmc_self_loops));
    stop_if_signalled(comm, "reading the chain");

    const solve::LocalRows rows = local_rows_of(chain);
    if (request.analyse_structure) {
        report.structure = analysis::analyse(comm, rows, request.per_class);
        const StructureWords words = describe_structure(comm, chain, *report.structure);
        report.structure_verdict = words.verdict;
        if (!report.structure->unique() && !request.per_class) {
            // Every rank holds the same structure, so every rank throws this.
            Error e(ExitCode::no_unique,
                    fmt::format("{}: {} (details: longrun check {}; --per-class solves each "
                                "class, --from STATE also gives the mixture)",
                                request.chain_path, words.verdict, request.chain_path));
            e.mark_agreed();
            throw e;
        }
        progress.note("structure: " + words.verdict);
        stop_if_signalled(comm, "checking the chain's structure");
        phase_done("structure");
    }
    // Per-class solves index the solve's vectors by file rows. (Checkpoints and
    // resumes are translated to and from file order, so they allow moved rows.)
    const bool file_order_only = report.structure && !report.structure->unique();
    const SolveLayout layout(comm, chain, rows, request.partition,
                             file_order_only ? "a per-class solve needs file order" : "");
    report.partition = layout.outcome();
    if (report.ranks > 1)
        progress.note(fmt::format("partition: {} ({})", partition::to_string(layout.outcome().used),
                                  layout.outcome().reason));
    phase_done("partition");
    solve::TransposedChain a = solve::assemble_transposed(comm, layout.rows());
    phase_done("assemble");
    report.residual_definition = solve::residual_definition(rows.time);

    solve::MethodSettings settings;
    settings.tolerance = request.tolerance;
    settings.residual_tolerance = request.residual_tolerance;
    settings.preconditioner = request.preconditioner;
    settings.progress = &progress;
    const solve::StateCoordinates coordinates = layout.to_solve_order(coordinates_of(chain));
    settings.coordinates = &coordinates;
    const solve::ChainTraits traits =
        traits_of(comm, chain, rows.time, report.structure ? &*report.structure : nullptr);
    // Methods with a large fixed cost (dense elimination, sparse LU) decline beyond
    // this instead of being killed by the kernel halfway; keep room for the rest.
    settings.memory_limit_bytes = traits.memory_per_rank_bytes * 8 / 10;

    const bool several = report.structure && !report.structure->unique();

    // Where the iteration starts: a checkpoint to resume, or an earlier result.
    solve::VecHandle warm;
    double elapsed_before = 0;
    std::optional<std::string> checkpoint_path = request.checkpoint;
    std::optional<std::string> start_file = request.warm_start;
    if (request.resume) {
        if (!checkpoint_path)
            checkpoint_path = request.resume;
        int present = 0;
        if (comm_rank(comm) == 0)
            present = std::filesystem::exists(*request.resume) ? 1 : 0;
        MPI_Bcast(&present, 1, MPI_INT, 0, comm);
        if (present) {
            const io::CheckpointInfo info = io::read_checkpoint_info(*request.resume, comm);
            if (info.states != chain.states || info.transitions != chain.transitions) {
                Error e(ExitCode::bad_input,
                        fmt::format("{}: checkpoint of a chain with {} states and {} transitions "
                                    "({}), not of {} ({} states, {} transitions)",
                                    *request.resume, info.states, info.transitions, info.chain_path,
                                    request.chain_path, chain.states, chain.transitions));
                e.mark_agreed();
                throw e;
            }
            // A resumed iterate carries on one solve of one chain: it must be this one.
            switch (io::match_chain(info.chain_hash, chain.content_hash)) {
            case io::ChainMatch::differs: {
                InputError e(io::chain_changed_message(*request.resume, info.chain_hash,
                                                       request.chain_path, chain.content_hash,
                                                       "delete the checkpoint to start afresh"));
                e.mark_agreed();
                throw e;
            }
            case io::ChainMatch::not_recorded:
                io::note_unrecorded_chain(comm, *request.resume, "an older checkpoint",
                                          "its number of states and transitions");
                break;
            case io::ChainMatch::same:
                break;
            }
            elapsed_before = info.elapsed_seconds;
            start_file = request.resume;
            report.start_from =
                fmt::format("resumed from {} ({} iteration {}, {:.1f} s before)", *request.resume,
                            info.method, info.iteration, info.elapsed_seconds);
        } else {
            report.start_from =
                fmt::format("no checkpoint at {} yet: started from the beginning", *request.resume);
        }
    }
    if (request.warm_start && !request.resume) {
        const std::string recorded = io::read_recorded_chain_hash(*request.warm_start, comm);
        switch (io::match_chain(recorded, chain.content_hash)) {
        case io::ChainMatch::differs:
            if (!request.warm_start_other_chain) {
                InputError e(io::chain_changed_message(
                    *request.warm_start, recorded, request.chain_path, chain.content_hash,
                    "--start-other-chain warm-starts from another chain's result anyway"));
                e.mark_agreed();
                throw e;
            }
            break;
        case io::ChainMatch::not_recorded:
            io::note_unrecorded_chain(comm, *request.warm_start, "older, or not from longrun",
                                      "its number of states");
            break;
        case io::ChainMatch::same:
            break;
        }
    }
    if (start_file && !several) {
        const auto local = layout.to_solve_order(
            io::read_distribution_slice(*start_file, comm, chain.rows, chain.states));
        warm = solve::create_state_vector(a);
        PetscScalar* xv = nullptr;
        solve::check(VecGetArray(warm, &xv), "VecGetArray");
        std::copy(local.begin(), local.end(), xv);
        solve::check(VecRestoreArray(warm, &xv), "VecRestoreArray");
        const solve::Certificate c = solve::certify(a, warm);
        report.start_residual = c.residual;
        if (start_file == request.warm_start)
            report.start_from = "warm start from " + *start_file;
        report.start_from += fmt::format("; residual {:.3e} on this chain", c.residual);
    } else if (start_file) {
        report.start_from = "warm start ignored: the chain has several closed classes";
    }
    if (!report.start_from.empty())
        progress.note(report.start_from);
    stop_if_signalled(comm, "preparing the solve");
    // Always there: without a path it only stops the methods on a signal. A
    // per-class solve iterates on sub-chains, whose iterates are no checkpoint.
    std::optional<CheckpointWriter> checkpoints;
    {
        io::CheckpointInfo info;
        info.chain_path = request.chain_path;
        info.chain_hash = chain.content_hash;
        info.states = chain.states;
        info.transitions = chain.transitions;
        info.elapsed_seconds = elapsed_before;
        if (several && checkpoint_path)
            progress.note("per-class solve: no checkpoints are written");
        checkpoints.emplace(comm, several ? std::string() : checkpoint_path.value_or(""),
                            request.checkpoint_every, info, chain.rows, &progress);
        if (layout.moved())
            checkpoints->set_file_order(
                [&layout](std::span<const double> v) { return layout.to_file_order(v); });
        settings.checkpoint = &*checkpoints;
    }
    phase_done("start");
    io::LocalClassData class_data;
    if (several) {
        solve_per_class(comm, request, chain, rows, a, settings, report, class_data);
    } else {
        solve::SolveOutcome outcome =
            solve::solve_stationary(a, request.method, settings, traits, warm.get());
        report.plan = outcome.plan;
        report.plan_reason = outcome.plan_reason;
        report.attempts = outcome.attempts;
        if (!outcome.met) // a method without iterations (direct, gth) ran past the signal
            checkpoints->stop_if_signalled(outcome.pi, outcome.method, outcome.iterations);
        if (checkpoints && !outcome.met && outcome.pi) {
            // The best iterate so far, for a resumed run with other settings.
            checkpoints->save(outcome.pi, outcome.method, outcome.iterations);
        }
        report.checkpoints_written = checkpoints ? checkpoints->written() : 0;
        report.method = outcome.method;
        report.iterations = outcome.iterations;
        report.certificate = outcome.certificate;
        if (!outcome.met)
            throw uncertified(request, report, outcome.attempts);
        report.local_pi = layout.to_file_order(local_entries(outcome.pi));
        // Detailed balance tells users whether a product-form shortcut may exist.
        const auto balance = summary::check_detailed_balance(a, outcome.pi);
        report.detailed_balance_violation = balance.max_relative_violation;
        report.reversible = summary::is_reversible(balance, report.certificate.residual);
        report.reversibility_verdict =
            summary::reversibility_verdict(balance, report.certificate.residual);
    }

    phase_done("solve");
    if (report.has_distribution)
        for (const auto& v : chain.variables) {
            report.variables.push_back(
                summary::marginal(comm, v.name, v.integral, v.values, report.local_pi));
            check_truncation(v, report.variables.back(), request.truncation_threshold, report);
        }
    report.truncation_threshold = request.truncation_threshold;
    for (const auto& note : report.truncation)
        if (note.warn)
            progress.warn(fmt::format(
                "P({} = {}) = {:.2e} at its declared {} bound exceeds {:.0e}: if the bound cuts "
                "off an unbounded quantity, the results are biased (widen it and solve again); a "
                "real capacity needs no action",
                note.variable, note.bound, note.mass, note.upper ? "upper" : "lower",
                request.truncation_threshold));

    phase_done("summaries");
    // Up to here, as the result file records it; the write is the last phase.
    report.wall_seconds =
        std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    report.peak_memory_bytes = peak_memory_bytes(comm);
    if (const int signal = agreed_stop_signal(comm))
        progress.note(fmt::format("{} came after the solve had finished: writing the result",
                                  signal_name(signal)));
    if (request.output) {
        io::write_result_file(*request.output, comm, result_content(report, request.chain_path),
                              chain.rows, chain.states, report.local_pi,
                              several ? &class_data : nullptr);
        report.output = request.output;
        phase_done("write");
    }
    return report;
}

} // namespace longrun::cli

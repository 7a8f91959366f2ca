#include "solve_pipeline.hpp"

#include "load.hpp"
#include "solve/assemble.hpp"
#include "structure_report.hpp"

#include <fmt/format.h>

#include <sys/resource.h>
#include <sys/stat.h>

#include <chrono>

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
    struct stat st {};
    if (::stat(chain_path.c_str(), &st) == 0) {
        c.origin.chain_bytes = static_cast<std::uint64_t>(st.st_size);
        c.origin.chain_mtime = static_cast<std::int64_t>(st.st_mtime);
    }
    auto& cert = c.certificate;
    cert.method = r.method;
    for (const auto& a : r.attempts)
        cert.trace.push_back(a.method + ": " + a.outcome);
    cert.iterations = static_cast<std::uint64_t>(r.iterations);
    cert.residual = r.certificate.residual;
    cert.tolerance = r.tolerance;
    cert.norm_error = r.certificate.norm_error;
    cert.min_entry = r.certificate.min_entry;
    cert.clipped_mass = r.certificate.clipped_mass;
    cert.wall_seconds = r.wall_seconds;
    cert.peak_memory_bytes = r.peak_memory_bytes;
    cert.ranks = r.ranks;
    cert.converged = r.certificate.meets(r.tolerance);
    cert.residual_definition = r.residual_definition;
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
        c.variables.push_back(std::move(s));
    }
    return c;
}

} // namespace

SolveReport run_solve(MPI_Comm comm, const SolveRequest& request) {
    const auto start = std::chrono::steady_clock::now();
    solve::Progress progress(comm, request.progress);
    // The method list is checked before any file is touched.
    (void)solve::plan_for(request.method);

    LoadedChain loaded =
        load_chain(request.chain_path, comm, request.validation, request.forced_rows);
    const io::Chain& chain = loaded.chain;
    SolveReport report;
    report.chain_path = request.chain_path;
    report.kind = chain.kind;
    report.states = chain.states;
    report.transitions = chain.transitions;
    report.ranks = comm_size(comm);
    report.validation = loaded.validation;
    report.tolerance = request.tolerance;
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

    const solve::LocalRows rows = local_rows_of(chain);
    if (request.analyse_structure) {
        report.structure = analysis::analyse(comm, rows);
        const StructureWords words = describe_structure(comm, chain, *report.structure);
        report.structure_verdict = words.verdict;
        if (!report.structure->unique()) {
            // Every rank holds the same structure, so every rank throws this.
            Error e(ExitCode::no_unique,
                    fmt::format("{}: {} (details: longrun check {})", request.chain_path,
                                words.verdict, request.chain_path));
            e.mark_agreed();
            throw e;
        }
        progress.note("structure: " + words.verdict);
    }
    solve::TransposedChain a = solve::assemble_transposed(comm, rows);
    report.residual_definition = solve::residual_definition(rows.time);

    solve::MethodSettings settings;
    settings.tolerance = request.tolerance;
    settings.preconditioner = request.preconditioner;
    settings.progress = &progress;
    solve::SolveOutcome outcome = solve::solve_stationary(a, request.method, settings);
    report.attempts = outcome.attempts;
    report.method = outcome.method;
    report.iterations = outcome.iterations;
    report.certificate = outcome.certificate;
    if (!outcome.met) {
        std::string why;
        for (const auto& at : outcome.attempts)
            why += (why.empty() ? "" : "; ") + at.method + " " + at.outcome;
        NumericalError failure(
            fmt::format("{}: no method reached the certificate {} <= {:.1e} ({})",
                        request.chain_path, report.residual_definition, request.tolerance, why));
        // The certificate is a global reduction, so every rank throws this same error;
        // unagreed, the front end would print it once per rank and abort the job.
        failure.mark_agreed();
        throw failure;
    }
    report.local_pi = local_entries(outcome.pi);

    for (const auto& v : chain.variables)
        report.variables.push_back(
            summary::marginal(comm, v.name, v.integral, v.values, report.local_pi));

    report.wall_seconds =
        std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    report.peak_memory_bytes = peak_memory_bytes(comm);
    if (request.output) {
        io::write_result_file(*request.output, comm, result_content(report, request.chain_path),
                              chain.rows, chain.states, report.local_pi);
        report.output = request.output;
    }
    return report;
}

} // namespace longrun::cli

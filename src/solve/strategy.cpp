#include "strategy.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <sstream>

namespace longrun::solve {

const std::vector<MethodEntry>& method_table() {
    static const std::vector<MethodEntry> table = {
        {"linear", "GMRES + algebraic multigrid on Q^T x = 0, then pinned (-linear_)", run_linear},
        {"eigen", "Krylov-Schur on P^T, ctmc uniformised (-eigen_)", run_eigen},
        {"shift-invert", "Krylov-Schur with shift-and-invert near eigenvalue 1 (-shift_)",
         run_shift_invert},
        {"direct", "sparse LU (MUMPS) of the pinned system (-direct_)", run_direct},
        {"aggregation", "multilevel iterative aggregation-disaggregation (-aggregation_)",
         run_aggregation},
        {"gauss-seidel", "Gauss-Seidel sweeps, forward/backward/symmetric (-gs_)",
         run_gauss_seidel},
        {"power", "power iteration, lazy when the chain is periodic (-power_)", run_power},
        {"gth", "exact GTH elimination on one rank, small chains (-gth_)", run_gth},
    };
    return table;
}

std::vector<std::string> method_names() {
    std::vector<std::string> names{"auto"};
    for (const auto& m : method_table())
        names.push_back(m.name);
    return names;
}

namespace {

const MethodEntry* find_method(const std::string& name) {
    for (const auto& m : method_table())
        if (m.name == name)
            return &m;
    return nullptr;
}

std::string joined_names() {
    std::string all;
    for (const auto& n : method_names())
        all += (all.empty() ? "" : ", ") + n;
    return all;
}

// Bytes of MUMPS factors are hard to predict; this errs high on purpose (the
// 1,002,001-state tandem line needed about 3 GiB, about 3,000 bytes per state).
std::uint64_t direct_memory_estimate(const ChainTraits& t) {
    return t.states * 3200ULL / std::max(1, t.ranks);
}

// The decision rule of `auto`; README "How auto chooses" gives the evidence
// (benchmarks/RESULTS.md, "Methods side by side"). Power and Gauss-Seidel are
// never chosen: they were the slowest everywhere measured.
std::vector<std::string> auto_plan(const ChainTraits& t, std::string& why) {
    constexpr std::uint64_t exact_limit = 2000;
    const bool direct_fits = t.memory_per_rank_bytes == 0
                                 ? t.states <= 200000
                                 : direct_memory_estimate(t) < t.memory_per_rank_bytes / 2;
    if (t.states <= exact_limit) {
        why = fmt::format("{} states <= {}: exact elimination first", t.states, exact_limit);
        return {"gth", "direct", "aggregation", "linear", "eigen"};
    }
    std::vector<std::string> plan;
    if (t.nearly_decomposable) {
        // Krylov methods stall on the cluster of eigenvalues near the stationary
        // one (linear needed 3,600 iterations on a 10^4-state block chain);
        // aggregation and factorisations do not care.
        why = "nearly decomposable (weakly coupled blocks): aggregation first, then "
              "factorisations; Krylov methods last";
        plan = {"aggregation"};
        if (direct_fits)
            plan.insert(plan.end(), {"direct", "shift-invert"});
        plan.insert(plan.end(), {"linear", "eigen"});
    } else {
        why = "aggregation first (fastest measured on grids, queues and graph walks), then "
              "GMRES + AMG";
        plan = {"aggregation", "linear"};
        if (direct_fits)
            plan.push_back("direct");
        plan.push_back("eigen");
    }
    if (!direct_fits)
        why += "; sparse LU skipped (memory estimate too large)";
    return plan;
}

std::pair<PetscLogEvent, bool> matmult_event() {
    PetscBool active = PETSC_FALSE;
    PetscLogIsActive(&active);
    if (!active && PetscLogDefaultBegin() != 0)
        return {0, false};
    PetscLogEvent id = 0;
    if (PetscLogEventGetId("MatMult", &id) != 0)
        return {0, false};
    return {id, true};
}

long matmult_count() {
    static const auto [id, ok] = matmult_event();
    if (!ok)
        return 0;
    PetscEventPerfInfo info{};
    if (PetscLogEventGetPerfInfo(0, id, &info) != 0)
        return 0;
    return info.count;
}

} // namespace

std::string describe(const Certificate& c, const MethodSettings& s) {
    const bool on_residual = s.residual_tolerance > 0;
    const std::string error =
        !std::isfinite(c.error_estimate)
            ? "error not estimated"
            : fmt::format("estimated error {:.2e}{}", c.error_estimate,
                          on_residual ? ""
                          : c.error_estimate <= s.tolerance
                              ? fmt::format(" <= {:.1e}", s.tolerance)
                              : fmt::format(" > {:.1e} ({:.0f}x over)", s.tolerance,
                                            c.error_estimate / s.tolerance));
    const std::string residual =
        !on_residual ? fmt::format("residual {:.2e}", c.residual)
        : c.residual <= s.residual_tolerance
            ? fmt::format("residual {:.2e} <= {:.1e}", c.residual, s.residual_tolerance)
            : fmt::format("residual {:.2e} > {:.1e} ({:.0f}x over)", c.residual,
                          s.residual_tolerance, c.residual / s.residual_tolerance);
    return on_residual ? residual + ", " + error : error + ", " + residual;
}

std::vector<std::string> plan_for(const std::string& method, const ChainTraits& traits,
                                  std::string* reason) {
    std::string why;
    std::vector<std::string> plan;
    if (method == "auto") {
        plan = auto_plan(traits, why);
    } else {
        std::stringstream in(method);
        std::string name;
        while (std::getline(in, name, ',')) {
            if (!find_method(name))
                throw UsageError("unknown method '" + name + "' (choose " + joined_names() + ")");
            plan.push_back(name);
        }
        if (plan.empty())
            throw UsageError("no method given (choose " + joined_names() + ")");
        why = "chosen by the user";
    }
    if (reason)
        *reason = why;
    return plan;
}

SolveOutcome solve_stationary(const TransposedChain& a, const std::string& method,
                              const MethodSettings& settings, const ChainTraits& traits,
                              Vec warm_start) {
    SolveOutcome out;
    out.plan = plan_for(method, traits, &out.plan_reason);
    if (settings.progress && method == "auto")
        settings.progress->note("auto: " + fmt::format("{}", fmt::join(out.plan, ", ")) + " (" +
                                out.plan_reason + ")");
    Attempt best;
    if (warm_start) {
        best.method = "start";
        best.x = create_state_vector(a);
        check(VecCopy(warm_start, best.x), "VecCopy");
        // A start carries no error estimate, however small its residual: the
        // methods below begin from it and refine it, which costs little when it
        // is already good (a resumed or repeated solve).
        best.certificate = certify(a, best.x);
    }
    for (const auto& name : out.plan) {
        AttemptRecord record;
        record.method = name;
        Vec warm = best.x ? best.x.get() : nullptr;
        const long products_before = matmult_count();
        const auto started = std::chrono::steady_clock::now();
        try {
            Attempt at = find_method(name)->run(a, warm, settings);
            record.iterations = at.iterations;
            record.residual = at.certificate.residual;
            record.met = at.certificate.meets(settings.tolerance, settings.residual_tolerance);
            record.error_estimate = at.certificate.error_estimate;
            record.history = at.history;
            record.history_seconds = at.seconds;
            record.notes = at.notes;
            record.outcome = !at.certificate.valid ? std::string()
                             : record.met ? "certified: " + describe(at.certificate, settings)
                                          : "not certified: " + describe(at.certificate, settings) +
                                                (at.notes.empty() ? "" : "; " + at.notes.back());
            if (!at.certificate.valid)
                record.outcome = at.x ? "no valid iterate: " + at.certificate.problem
                                      : "stopped before producing an iterate" +
                                            (at.notes.empty() ? "" : " (" + at.notes.back() + ")");
            out.iterations += at.iterations;
            if (at.x && is_better(at.certificate, best))
                best = std::move(at);
        } catch (const MethodDeclined& e) {
            // Agreed on every rank by the method (size or memory limits): skip it.
            record.outcome = std::string("skipped: ") + e.what();
        } catch (const Error& e) {
            // A numerical failure inside one method (a breakdown in PETSc, a coarse
            // chain GTH cannot eliminate) is a reason to try the next one: `auto`
            // and comma lists promise to fall back on failure. Bad input, a wrong
            // option and a stop signal concern every method alike and end the run.
            if (e.code() != ExitCode::numerical)
                throw;
            // With several ranks the error may have hit this rank only, while the
            // others still wait inside the method's collective calls: unless the
            // method says every rank threw it, passing it on makes the front end
            // abort the job instead of hanging.
            int ranks = 1;
            MPI_Comm_size(PetscObjectComm((PetscObject)a.matrix.get()), &ranks);
            if (ranks > 1 && !e.agreed())
                throw;
            record.outcome = std::string("failed: ") + e.what();
        }
        record.seconds =
            std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
        record.matvecs = matmult_count() - products_before;
        if (settings.progress)
            settings.progress->note(name + ": " + record.outcome);
        out.attempts.push_back(std::move(record));
        if (out.attempts.back().met)
            break;
    }
    if (best.x) {
        out.pi = std::move(best.x);
        out.certificate = best.certificate;
        out.method = best.method;
        out.met = out.certificate.meets(settings.tolerance, settings.residual_tolerance);
    }
    return out;
}

} // namespace longrun::solve

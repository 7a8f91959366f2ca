#include "strategy.hpp"

#include <fmt/format.h>

namespace longrun::solve {

std::vector<std::string> method_names() {
    return {"auto", "linear", "eigen"};
}

std::vector<std::string> plan_for(const std::string& method) {
    if (method == "auto")
        return {"linear", "eigen"};
    if (method == "linear" || method == "eigen")
        return {method};
    throw UsageError("unknown method '" + method + "' (choose auto, linear or eigen)");
}

SolveOutcome solve_stationary(const TransposedChain& a, const std::string& method,
                              const MethodSettings& settings) {
    SolveOutcome out;
    Attempt best;
    for (const auto& name : plan_for(method)) {
        AttemptRecord record;
        record.method = name;
        Vec warm = best.x ? best.x.get() : nullptr;
        try {
            Attempt at =
                name == "linear" ? run_linear(a, warm, settings) : run_eigen(a, warm, settings);
            record.iterations = at.iterations;
            record.residual = at.certificate.residual;
            record.met = at.certificate.meets(settings.tolerance);
            record.history = at.history;
            record.notes = at.notes;
            record.outcome = record.met ? fmt::format("certified residual {:.3e} <= {:.1e}",
                                                      record.residual, settings.tolerance)
                             : at.certificate.valid
                                 ? fmt::format("certified residual {:.3e} > {:.1e}",
                                               record.residual, settings.tolerance)
                                 : "no valid iterate: " + at.certificate.problem;
            out.iterations += at.iterations;
            if (at.x && is_better(at.certificate, best))
                best = std::move(at);
        } catch (const LibraryError& e) {
            // A breakdown in one method is a reason to try the next one, but only
            // alone: with several ranks the error may have hit this rank only,
            // while the others still wait inside the method's collective calls.
            // Passing it on makes the front end abort the job instead of hanging.
            int ranks = 1;
            MPI_Comm_size(PetscObjectComm((PetscObject)a.matrix.get()), &ranks);
            if (ranks > 1)
                throw;
            record.outcome = std::string("failed: ") + e.what();
        }
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
        out.met = out.certificate.meets(settings.tolerance);
    }
    return out;
}

} // namespace longrun::solve

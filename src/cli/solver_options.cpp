#include "solver_options.hpp"

#include "io/error.hpp"
#include "solve/strategy.hpp"

#include <fmt/format.h>

namespace longrun::cli {

std::string methods_help() {
    std::string text = "  auto          size, kind and structure decide; falls back on failure\n";
    for (const auto& m : solve::method_table())
        text += fmt::format("  {:<13} {}\n", m.name, m.summary);
    return text;
}

void add_solver_options(CLI::App* sub, SolverOptions& options) {
    sub->add_option("--method", options.method,
                    "a method, or several separated by commas and tried in order (see above)")
        ->default_val("auto")
        ->check([](const std::string& v) -> std::string {
            try {
                (void)solve::plan_for(v, {});
            } catch (const Error& e) {
                return e.what();
            }
            return "";
        });
    sub->add_option("--tol", options.tolerance, "certificate tolerance on the residual")
        ->default_val(1e-10)
        ->check(CLI::PositiveNumber);
    sub->add_option("--preconditioner", options.preconditioner,
                    "for linear: amg (hypre BoomerAMG), ilu (block-Jacobi/ILU(0)), asm (additive "
                    "Schwarz, ILU(0) on overlapping blocks), lu (MUMPS)")
        ->default_val("amg")
        ->check(CLI::IsMember({"amg", "ilu", "asm", "lu"}));
}

} // namespace longrun::cli

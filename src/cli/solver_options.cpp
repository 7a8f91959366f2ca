#include "solver_options.hpp"

#include "io/error.hpp"
#include "option_range.hpp"
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
    sub->add_option("--tol", options.tolerance,
                    "the answer is certified only when its estimated error ||pi_hat - pi||_1 is "
                    "at most this, so any probability computed from it is within tol/2 (in "
                    "(0, 1e-2]); the residual target is derived from it")
        ->default_val(1e-10)
        ->check(number_in(Interval::open_closed(0, 1e-2)));
    sub->add_option(
           "--residual-tol", options.residual_tolerance,
           "certify on the residual instead (what --tol meant before errors were estimated): "
           "residual <= this, in (0, 1e-2]; the error is still estimated and reported")
        ->check(number_in(Interval::open_closed(0, 1e-2)));
    sub->add_option("--preconditioner", options.preconditioner,
                    "for linear: amg (hypre BoomerAMG), ilu (block-Jacobi/ILU(0)), asm (additive "
                    "Schwarz, ILU(0) on overlapping blocks), lu (MUMPS)")
        ->default_val("amg")
        ->check(CLI::IsMember({"amg", "ilu", "asm", "lu"}));
}

} // namespace longrun::cli

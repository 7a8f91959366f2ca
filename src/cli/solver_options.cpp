#include "solver_options.hpp"

#include "io/error.hpp"
#include "solve/strategy.hpp"

#include <fmt/format.h>

#include <exception>
#include <string>

namespace longrun::cli {

std::string methods_help() {
    std::string text = "  auto          size, kind and structure decide; falls back on failure\n";
    for (const auto& m : solve::method_table())
        text += fmt::format("  {:<13} {}\n", m.name, m.summary);
    return text;
}

namespace {

// A tolerance outside (0, 1e-2] is a mistake (2 would "certify" anything, 0 can
// never be met): one sentence with the value as typed.
CLI::Validator tolerance_range(const std::string& option) {
    return CLI::Validator(
        [option](std::string& typed) -> std::string {
            double v = 0;
            try {
                std::size_t used = 0;
                v = std::stod(typed, &used);
                if (used != typed.size())
                    v = -1;
            } catch (const std::exception&) {
                v = -1;
            }
            if (v > 0 && v <= 1e-2)
                return "";
            return fmt::format("{} {}: must be a number in (0, 1e-2], e.g. 1e-10", option, typed);
        },
        "in (0, 1e-2]");
}

} // namespace

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
        ->check(tolerance_range("--tol"));
    sub->add_option(
           "--residual-tol", options.residual_tolerance,
           "certify on the residual instead (what --tol meant before errors were estimated): "
           "residual <= this, in (0, 1e-2]; the error is still estimated and reported")
        ->check(tolerance_range("--residual-tol"));
    sub->add_option("--preconditioner", options.preconditioner,
                    "for linear: amg (hypre BoomerAMG), ilu (block-Jacobi/ILU(0)), asm (additive "
                    "Schwarz, ILU(0) on overlapping blocks), lu (MUMPS)")
        ->default_val("amg")
        ->check(CLI::IsMember({"amg", "ilu", "asm", "lu"}));
}

} // namespace longrun::cli

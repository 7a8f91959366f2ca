// --method, --tol and --preconditioner: how a chain is solved, the same for
// `solve` and for `sweep` (one solve per point).
#pragma once

#include <CLI/CLI.hpp>

#include <string>

namespace longrun::cli {

struct SolverOptions {
    std::string method = "auto";   // a method name or a comma list tried in order
    double tolerance = 1e-10;      // on the estimated error ||pi_hat - pi||_1
    double residual_tolerance = 0; // > 0: --residual-tol, certify on the residual
    std::string preconditioner = "amg";
};

// One line per method for --help: "auto" and then the method table.
std::string methods_help();

void add_solver_options(CLI::App* sub, SolverOptions& options);

} // namespace longrun::cli

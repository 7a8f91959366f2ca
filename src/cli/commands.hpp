#pragma once

#include <CLI/CLI.hpp>
#include <mpi.h>

#include "io/chain_file.hpp"

#include <functional>

namespace longrun::cli {

// Each verb registers its options and returns the action to run after parsing.
using Action = std::function<int(MPI_Comm)>;

// --renormalize and --row-sum-tol, the same for every verb that reads a chain.
void add_validation_options(CLI::App* sub, io::ValidationOptions& options);

Action add_convert(CLI::App& app);
Action add_solve(CLI::App& app);
Action add_check(CLI::App& app);
Action add_generate(CLI::App& app);
Action add_compare(CLI::App& app);
Action add_summarize(CLI::App& app);
Action add_sweep(CLI::App& app);
Action add_simulate(CLI::App& app);

} // namespace longrun::cli

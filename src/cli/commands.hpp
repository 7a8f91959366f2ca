#pragma once

#include <CLI/CLI.hpp>
#include <mpi.h>

#include <functional>

namespace longrun::cli {

// Each verb registers its options and returns the action to run after parsing.
using Action = std::function<int(MPI_Comm)>;

Action add_convert(CLI::App& app);
Action add_solve(CLI::App& app);
Action add_check(CLI::App& app);
Action add_generate(CLI::App& app);

} // namespace longrun::cli

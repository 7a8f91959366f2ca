// Residual against wall time, one chart per chain and one line per method, as
// PNG and SVG: how fast each method gets where, not only where it ends.
#pragma once

#include "compare_job.hpp"

#include <string>
#include <vector>

namespace longrun::cli {

// The file name (without extension) of each chain's chart: PREFIX-<chain file
// stem>, with -2, -3 ... added when two chains share a stem.
std::vector<std::string> plot_names(const std::string& prefix,
                                    const std::vector<std::string>& chains);

// Serial (rank 0). Writes <name>.png and <name>.svg for each chain that was
// solved; returns the files written. Throws OutputError.
std::vector<std::string> write_compare_plots(const CompareReport& report,
                                             const std::vector<std::string>& names);

} // namespace longrun::cli

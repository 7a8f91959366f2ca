// A SummaryReport as people read it (a terminal table), as programs read it
// (JSON) and as spreadsheets read it (CSV, one number per row).
#pragma once

#include "summarize_job.hpp"

#include <nlohmann/json.hpp>

#include <optional>
#include <string>

namespace longrun::cli {

std::string summary_text(const SummaryReport& r);
nlohmann::json summary_json(const SummaryReport& r);
// Columns: kind,name,statistic,value,error_bound,resolved (e.g.
// "measure,load,q0.999,41,,true"); the last two empty where no bound is known.
std::string summary_csv(const SummaryReport& r);

// "q0.999" for 0.999, "q0.5" for 0.5: the statistic's name in CSV, JSON and HDF5.
std::string quantile_label(double level);

// The line explaining "unresolved" and '?' under a table that shows them; empty
// without a bound.
std::string unresolved_footnote(const std::optional<double>& probability_bound);

} // namespace longrun::cli

// What a sweep leaves behind: the terminal table, PREFIX.csv, PREFIX.json, one
// plot per column against the parameter, and for job arrays one point file per
// task (PREFIX.point-INDEX.json) that --gather merges into the same table.
#pragma once

#include "sweep_job.hpp"

#include <nlohmann/json.hpp>

#include <string>
#include <vector>

namespace longrun::cli {

std::string sweep_text(const SweepTable& table);
std::string sweep_csv(const SweepTable& table);
nlohmann::ordered_json sweep_json(const SweepTable& table);

// PREFIX-<column>.png and .svg per summary column (the name made safe for a file
// system: "P(load>=40)" -> "P-load-ge-40"); the --until threshold is the
// reference line on its column. Returns the files written. Serial (rank 0).
std::vector<std::string> write_sweep_plots(const SweepTable& table, const std::string& prefix);
// The plot names (without extension) the table will get, one per column.
std::vector<std::string> sweep_plot_names(const SweepTable& table, const std::string& prefix);

std::string point_file_name(const std::string& prefix, std::size_t index);
// One point of a sweep with the sweep's definition, so that --gather needs
// nothing else. Serial. Throws OutputError.
void write_point_file(const std::string& prefix, const SweepTable& one_point);
// Serial. Reads every PREFIX.point-*.json, checks that they belong to the same
// sweep, and returns the table one run would have made (ending at the --until
// crossing). Throws InputError naming the missing points or the disagreeing file.
SweepTable gather_point_files(const std::string& prefix);

} // namespace longrun::cli

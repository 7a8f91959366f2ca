// The three forms of a comparison: a table for people, JSON and CSV for scripts.
#pragma once

#include "compare_job.hpp"

#include <nlohmann/json.hpp>

#include <string>

namespace longrun::cli {

std::string compare_text(const CompareReport& report);
nlohmann::json compare_json(const CompareReport& report);
// One header row, then one row per (chain, method); RFC 4180 quoting.
std::string compare_csv(const CompareReport& report);

} // namespace longrun::cli

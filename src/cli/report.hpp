#pragma once

#include "solve_pipeline.hpp"

#include <nlohmann/json.hpp>

#include <string>

namespace longrun::cli {

nlohmann::json to_json(const SolveReport& report);
std::string to_text(const SolveReport& report);

} // namespace longrun::cli

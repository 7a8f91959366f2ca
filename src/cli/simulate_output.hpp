// What `simulate` prints: the tables and verdict as text, and the same as JSON.
#pragma once

#include "simulate_job.hpp"

#include <nlohmann/json.hpp>

#include <string>

namespace longrun::cli {

// Per-replication tables appear when `per_replication` is set; the pooled table
// (with the solved values and ok/DISAGREES under --against) and the verdict always.
std::string simulate_text(const SimulateReport& report, const SimulateRequest& request,
                          bool per_replication);

nlohmann::json simulate_json(const SimulateReport& report, const SimulateRequest& request);

// One progress line for a finished replication.
std::string replication_line(const simulate::ReplicationResult& r, std::uint64_t of,
                             const std::string& unit);

} // namespace longrun::cli

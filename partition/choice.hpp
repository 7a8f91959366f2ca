// When the graph partition is worth it. Per product a rank pays for its
// nonzeros (about 1 ns each here, streaming) and for receiving its off-rank
// vector entries (8 bytes each plus message latency, and the gather into the
// ghost buffer). Moving the rows costs one all-to-all of the chain, a few
// products' worth, and the partitioner itself; a solve takes hundreds to
// thousands of products. So a partition that halves the communication volume
// pays off whenever communication is a visible share of the product, and one
// that saves less is within the noise of the measurement; a partition that
// loads one rank markedly more than contiguous blocks do loses what it saves.
#pragma once

#include "quality.hpp"

#include <optional>
#include <string>

namespace longrun::partition {

enum class Layout { automatic, contiguous, graph };

std::optional<Layout> parse_layout(const std::string& text);
std::string to_string(Layout layout);

// The rule `auto` applies: graph when its total volume is at most
// `volume_ratio` of contiguous and its nonzero imbalance at most
// `imbalance_slack` above contiguous's (or at most 1 + slack).
struct LayoutRule {
    double volume_ratio = 0.5;
    double imbalance_slack = 0.05;
};

bool graph_pays_off(const Quality& contiguous, const Quality& graph, const LayoutRule& rule = {});

// Whether `auto` should run the partitioner at all. PT-Scotch is not free (40 s
// on a loaded 2-core machine for a 10^6-node random graph), so it is skipped
// when the busiest rank receives fewer vector entries than `share` of its
// nonzeros: then even a partition without any communication would save less
// than about that share of the product's memory traffic.
bool communication_visible(const Quality& contiguous, double share = 0.01);

} // namespace longrun::partition

#include "choice.hpp"

#include <algorithm>

namespace longrun::partition {

std::optional<Layout> parse_layout(const std::string& text) {
    if (text == "auto")
        return Layout::automatic;
    if (text == "contiguous")
        return Layout::contiguous;
    if (text == "graph")
        return Layout::graph;
    return std::nullopt;
}

std::string to_string(Layout layout) {
    switch (layout) {
    case Layout::automatic:
        return "auto";
    case Layout::contiguous:
        return "contiguous";
    case Layout::graph:
        return "graph";
    }
    return "?";
}

bool graph_pays_off(const Quality& contiguous, const Quality& graph, const LayoutRule& rule) {
    const bool fewer = double(graph.volume) <= rule.volume_ratio * double(contiguous.volume);
    const double allowed = std::max(contiguous.imbalance, 1.0) + rule.imbalance_slack;
    return fewer && graph.imbalance <= allowed;
}

bool communication_visible(const Quality& contiguous, double share) {
    return double(contiguous.max_volume) >= share * double(contiguous.max_nonzeros);
}

} // namespace longrun::partition

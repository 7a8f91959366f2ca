// The distribution of one quantity X in one figure: its probabilities P(X = x)
// as bars (upper panel, linear scale, where the bulk shows) and its tail
// function P(X >= x) as a step line on a log scale (lower panel, where the rare
// values show), with marker lines (e.g. quantiles) through both panels.
#pragma once

#include "marker_lines.hpp"
#include "stream.hpp"

#include <string>
#include <vector>

namespace longrun::plot {

struct DistributionChart {
    std::string title, x_label;
    // Same length; values strictly increasing. Each value may stand for a bin of
    // consecutive values from itself up to the next one.
    std::vector<double> values, pmf, tail;
    std::string pmf_label = "P(X = x)", tail_label = "P(X >= x)";
    std::vector<MarkerLine> markers;
    // Tail values below this are drawn on the lower edge: a probability of 1e-300
    // is real but would squash every decade that matters.
    double tail_floor = 1e-16;
    int width = 1000, height = 800; // pixels (PNG) or points (SVG)
};

// Writes the chart to `path` under a temporary name, renamed when complete.
// Serial (call it on one rank). Throws OutputError.
void write_distribution_chart(const DistributionChart& chart, const std::string& path,
                              Format format);

} // namespace longrun::plot

// A chart of lines (x against y, optionally log y) with a legend, written as PNG
// or SVG. What the CLI draws: residual histories against time; what summaries
// draw: marginals and tails.
#pragma once

#include "stream.hpp"

#include <optional>
#include <string>
#include <vector>

namespace longrun::plot {

struct Series {
    std::string label;
    std::vector<double> x, y; // same length; points with y <= 0 are left out on a log axis
    bool markers = false;     // draw each point too (a series of one point always gets one)
};

struct ReferenceLine {
    double y = 0;
    std::string label;
};

struct LineChart {
    std::string title, x_label, y_label;
    bool log_y = false;
    // Time and iteration axes start at 0; a parameter axis (a sweep over 2..6)
    // should span only the values drawn.
    bool x_from_zero = true;
    // Log axis: values below this are drawn on the lower edge, so that one exact
    // answer (a residual of 1e-40) does not squash every other line.
    std::optional<double> y_floor;
    std::vector<Series> series;
    std::optional<ReferenceLine> reference; // a dashed horizontal line, e.g. a tolerance
    int width = 1000, height = 700;         // pixels (PNG) or points (SVG)
};

// Writes the chart to `path` under a temporary name, renamed when complete.
// Serial (call it on one rank). Throws OutputError.
void write_chart(const LineChart& chart, const std::string& path, Format format);

} // namespace longrun::plot

// The pictures of a summary: for each measure its distribution and tail with the
// chosen quantiles marked, and the residual history of the solve. Written as PNG
// and SVG files next to each other, or rendered in memory for the HTML report.
#pragma once

#include "plot/distribution_chart.hpp"
#include "plot/line_chart.hpp"
#include "summarize_job.hpp"

#include <string>
#include <variant>
#include <vector>

namespace longrun::cli {

struct SummaryFigure {
    std::string stem;    // file-name part: a measure's sanitised name, or "residuals"
    std::string caption; // one line saying what the figure shows
    std::variant<plot::DistributionChart, plot::LineChart> chart;
};

// One figure per measure, in the report's order, then the residual history (left
// out when the solve recorded neither a history nor a final residual). Stems are
// unique: characters outside [A-Za-z0-9._-] become '_', repeats get -2, -3 ...
std::vector<SummaryFigure> summary_figures(const SummaryReport& report);

// Serial. Writes one figure to `path` (temporary name, then renamed). Throws OutputError.
void write_figure(const SummaryFigure& figure, const std::string& path, plot::Format format);

// Serial. The figure as PNG bytes, through a temporary file that is removed again.
// Throws OutputError.
std::string render_png(const SummaryFigure& figure);

// Serial (rank 0). Writes PREFIX-<stem>.png and PREFIX-<stem>.svg for every
// figure; returns the files written. Throws OutputError.
std::vector<std::string> write_summary_plots(const SummaryReport& report,
                                             const std::string& prefix);

} // namespace longrun::cli

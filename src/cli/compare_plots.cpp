#include "compare_plots.hpp"

#include "plot/line_chart.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <filesystem>

namespace longrun::cli {

std::vector<std::string> plot_names(const std::string& prefix,
                                    const std::vector<std::string>& chains) {
    std::vector<std::string> names;
    for (const auto& chain : chains) {
        const std::string base = prefix + "-" + std::filesystem::path(chain).stem().string();
        std::string name = base;
        for (int k = 2; std::find(names.begin(), names.end(), name) != names.end(); ++k)
            name = fmt::format("{}-{}", base, k);
        names.push_back(name);
    }
    return names;
}

namespace {

plot::LineChart chart_of(const CompareReport& report, const CompareChain& chain) {
    plot::LineChart chart;
    chart.title = fmt::format("{}: {}, {} states, {} transitions",
                              std::filesystem::path(chain.path).filename().string(),
                              io::to_string(chain.kind), chain.states, chain.transitions);
    chart.x_label = "wall time since the method started (s)";
    chart.y_label = "residual (each method's own)";
    chart.log_y = true;
    chart.y_floor = std::min(1e-20, report.tolerance * 1e-6); // rounding-level residuals
    chart.reference = plot::ReferenceLine{report.tolerance, "tolerance"};
    for (const auto& run : report.runs) {
        if (run.chain != chain.path)
            continue;
        plot::Series s;
        if (!run.history.empty()) {
            s.label = run.method;
            s.x = run.history_seconds;
            s.y = run.history;
        } else if (run.residual) {
            // A method without iterations (elimination): where it ended.
            s.label = run.method + " (final)";
            s.x = {run.seconds};
            s.y = {*run.residual};
        } else {
            // Kept empty (not drawn, not in the legend) so that each method has the
            // same colour in every chart of the comparison.
            s.label = run.method;
        }
        chart.series.push_back(std::move(s));
    }
    return chart;
}

} // namespace

std::vector<std::string> write_compare_plots(const CompareReport& report,
                                             const std::vector<std::string>& names) {
    std::vector<std::string> written;
    for (std::size_t c = 0; c < report.chains.size() && c < names.size(); ++c) {
        if (!report.chains[c].solvable)
            continue;
        const plot::LineChart chart = chart_of(report, report.chains[c]);
        for (const auto format : {plot::Format::png, plot::Format::svg}) {
            const std::string file = names[c] + plot::extension(format);
            plot::write_chart(chart, file, format);
            written.push_back(file);
        }
    }
    return written;
}

} // namespace longrun::cli

#include "summary_plots.hpp"

#include "io/error.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cerrno>
#include <cstdlib>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <sstream>
#include <unistd.h>

namespace longrun::cli {

namespace {

std::string sanitised(const std::string& name) {
    std::string out;
    for (char c : name) {
        const bool kept = (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') ||
                          (c >= '0' && c <= '9') || c == '.' || c == '_' || c == '-';
        out += kept ? c : '_';
    }
    // "." and ".." as a whole stem would still be harmless after "PREFIX-", but a
    // name of dots alone says nothing in a file listing.
    if (out.empty() || out.find_first_not_of('.') == std::string::npos)
        out = "measure";
    return out;
}

std::string unique_stem(const std::string& base, const std::vector<std::string>& taken) {
    std::string stem = base;
    for (int k = 2; std::find(taken.begin(), taken.end(), stem) != taken.end(); ++k)
        stem = fmt::format("{}-{}", base, k);
    return stem;
}

std::string percent(double level) {
    return fmt::format("{:g}%", level * 100);
}

plot::DistributionChart measure_chart(const io::MeasureRecord& m) {
    plot::DistributionChart c;
    c.title = fmt::format("{}: mean {:.4g}, std {:.4g}{}", m.name, m.mean, m.std,
                          m.binned ? " (values merged into bins)" : "");
    c.x_label = m.name;
    c.values = m.values;
    c.pmf = m.pmf;
    c.tail = m.tail;
    c.pmf_label = m.binned ? "P(X in bin)" : "P(X = x)";
    for (const auto& q : m.quantiles)
        c.markers.push_back({q.value, fmt::format("{} = {:g}", percent(q.level), q.value)});
    return c;
}

std::optional<plot::LineChart> residual_chart(const SolveRecord& solve) {
    plot::LineChart chart;
    // The line chart prints text as PLplot reads it: a '#' must be doubled.
    chart.title = plot::plot_text(fmt::format("residual history: {}", solve.method));
    chart.x_label = "iteration (attempts in the order they ran)";
    chart.y_label =
        plot::plot_text(solve.residual_definition.empty() ? "residual" : solve.residual_definition);
    chart.log_y = true;
    chart.y_floor = std::min(1e-20, solve.tolerance > 0 ? solve.tolerance * 1e-6 : 1e-20);
    if (solve.tolerance > 0)
        chart.reference = plot::ReferenceLine{solve.tolerance, "tolerance"};
    // Iterations counted across attempts, so each attempt's line starts where the
    // previous one stopped and the chart reads as the solve went.
    double iteration = 0;
    for (const auto& attempt : solve.history) {
        plot::Series s;
        s.label = plot::plot_text(attempt.name);
        for (double r : attempt.residuals) {
            s.x.push_back(++iteration);
            s.y.push_back(r);
        }
        chart.series.push_back(std::move(s));
    }
    if (iteration == 0) {
        if (!(solve.residual >= 0) || solve.method.empty())
            return std::nullopt;
        // A method without iterations (elimination): where it ended.
        chart.series.push_back(
            {plot::plot_text(solve.method + " (final)"), {1}, {solve.residual}, true});
    }
    return chart;
}

// A file in the temporary folder that is gone again when this ends.
class ScratchFile {
  public:
    ScratchFile() {
        const auto pattern =
            (std::filesystem::temp_directory_path() / "longrun-figure-XXXXXX").string();
        std::vector<char> name(pattern.begin(), pattern.end());
        name.push_back('\0');
        const int fd = ::mkstemp(name.data());
        if (fd < 0)
            throw OutputError(pattern +
                              ": cannot create a temporary file: " + std::strerror(errno));
        ::close(fd);
        path_ = name.data();
    }
    ScratchFile(const ScratchFile&) = delete;
    ScratchFile& operator=(const ScratchFile&) = delete;
    ~ScratchFile() { std::remove(path_.c_str()); }
    const std::string& path() const { return path_; }

  private:
    std::string path_;
};

} // namespace

std::vector<SummaryFigure> summary_figures(const SummaryReport& report) {
    std::vector<SummaryFigure> figures;
    // "residuals" is taken first, so that a measure of that name cannot claim it.
    std::vector<std::string> taken{"residuals"};
    for (const auto& m : report.summary.measures) {
        SummaryFigure f;
        f.stem = unique_stem(sanitised(m.name), taken);
        taken.push_back(f.stem);
        f.caption = fmt::format("Distribution of {} (upper) and its tail P({} >= x) on a log "
                                "scale (lower); dashed lines: quantiles.",
                                m.name, m.name);
        f.chart = measure_chart(m);
        figures.push_back(std::move(f));
    }
    if (auto chart = residual_chart(report.solve)) {
        SummaryFigure f;
        f.stem = "residuals";
        f.caption = "Residual of the solve against iteration, one line per attempt; dashed: "
                    "the tolerance.";
        f.chart = std::move(*chart);
        figures.push_back(std::move(f));
    }
    return figures;
}

void write_figure(const SummaryFigure& figure, const std::string& path, plot::Format format) {
    if (const auto* d = std::get_if<plot::DistributionChart>(&figure.chart))
        plot::write_distribution_chart(*d, path, format);
    else
        plot::write_chart(std::get<plot::LineChart>(figure.chart), path, format);
}

std::string render_png(const SummaryFigure& figure) {
    ScratchFile scratch;
    write_figure(figure, scratch.path(), plot::Format::png);
    std::ifstream in(scratch.path(), std::ios::binary);
    std::ostringstream bytes;
    bytes << in.rdbuf();
    if (!in || !bytes)
        throw OutputError(scratch.path() + ": cannot read back the rendered figure");
    return std::move(bytes).str();
}

std::vector<std::string> write_summary_plots(const SummaryReport& report,
                                             const std::string& prefix) {
    std::vector<std::string> written;
    for (const auto& figure : summary_figures(report)) {
        for (const auto format : {plot::Format::png, plot::Format::svg}) {
            const std::string file = prefix + "-" + figure.stem + plot::extension(format);
            write_figure(figure, file, format);
            written.push_back(file);
        }
    }
    return written;
}

} // namespace longrun::cli

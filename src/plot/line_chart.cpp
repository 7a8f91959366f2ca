#include "line_chart.hpp"

#include "io/atomic_output.hpp"

#include <plplot.h>

#include <algorithm>
#include <array>
#include <cmath>
#include <limits>

namespace longrun::plot {

namespace {

// cmap0: 0 background, 1 axes and text, 2 reference line, then one colour per
// series (Okabe-Ito, told apart also with the common colour-vision deficiencies).
constexpr int axes_colour = 1, reference_colour = 2, first_series_colour = 3;
constexpr std::array<std::array<PLINT, 3>, 8> series_palette{{{0, 114, 178},
                                                              {213, 94, 0},
                                                              {0, 158, 115},
                                                              {204, 121, 167},
                                                              {230, 159, 0},
                                                              {86, 180, 233},
                                                              {0, 0, 0},
                                                              {240, 228, 66}}};

void set_palette() {
    std::array<PLINT, first_series_colour + series_palette.size()> r{}, g{}, b{};
    r[0] = g[0] = b[0] = 255;
    r[reference_colour] = g[reference_colour] = b[reference_colour] = 140;
    for (std::size_t i = 0; i < series_palette.size(); ++i) {
        r[first_series_colour + i] = series_palette[i][0];
        g[first_series_colour + i] = series_palette[i][1];
        b[first_series_colour + i] = series_palette[i][2];
    }
    plscmap0(r.data(), g.data(), b.data(), static_cast<PLINT>(r.size()));
}

// A Hershey glyph by number, which every driver can draw (no font needed).
constexpr const char* marker = "#(850)";

PLINT colour_of(std::size_t series) {
    return first_series_colour + static_cast<PLINT>(series % series_palette.size());
}

// The points that can be drawn: finite, and positive on a log axis (as log10).
struct Drawable {
    std::vector<PLFLT> x, y;
};

Drawable drawable(const Series& s, bool log_y, std::optional<double> floor) {
    Drawable d;
    const std::size_t n = std::min(s.x.size(), s.y.size());
    for (std::size_t i = 0; i < n; ++i) {
        double y = s.y[i];
        if (log_y && floor && y < *floor)
            y = *floor;
        if (!std::isfinite(s.x[i]) || !std::isfinite(y) || (log_y && y <= 0))
            continue;
        d.x.push_back(s.x[i]);
        d.y.push_back(log_y ? std::log10(y) : y);
    }
    return d;
}

// Decades per labelled tick: at most about a dozen labels, so that they never overlap.
double decade_step(double decades) {
    return std::max(1.0, std::ceil(decades / 12));
}

struct Range {
    double low = std::numeric_limits<double>::infinity();
    double high = -std::numeric_limits<double>::infinity();
    void add(double v) {
        low = std::min(low, v);
        high = std::max(high, v);
    }
    bool empty() const { return !(low <= high); }
};

} // namespace

void write_chart(const LineChart& chart, const std::string& path, Format format) {
    const bool log_y = chart.log_y;
    std::vector<Drawable> lines;
    Range xs, ys;
    if (chart.x_from_zero)
        xs.add(0);
    for (const auto& s : chart.series) {
        lines.push_back(drawable(s, log_y, chart.y_floor));
        for (double x : lines.back().x)
            xs.add(x);
        for (double y : lines.back().y)
            ys.add(y);
    }
    if (chart.reference && (!log_y || chart.reference->y > 0))
        ys.add(log_y ? std::log10(chart.reference->y) : chart.reference->y);
    if (ys.empty())
        ys = Range{0, 1};
    if (log_y) { // whole decades, so that the log labels fall on the box's edges
        ys.low = std::floor(ys.low);
        ys.high = std::max(std::ceil(ys.high), ys.low + 1);
    } else if (ys.high == ys.low) {
        ys.low -= 1;
        ys.high += 1;
    } else { // markers on the extremes stay inside the box
        const double pad = 0.04 * (ys.high - ys.low);
        ys.low -= pad;
        ys.high += pad;
    }
    if (!(xs.high > xs.low))
        xs.high = xs.low + 1;
    const double margin = 0.03 * (xs.high - xs.low);
    xs.high += margin;
    if (!chart.x_from_zero) // markers on the first value stay clear of the box
        xs.low -= margin;

    io::AtomicOutput out(path);
    Stream stream(out.temporary(), format, chart.width, chart.height);
    set_palette();
    pladv(0);
    // Room on the right for the legend, so that it never hides a line.
    plvpor(0.1, 0.74, 0.1, 0.9);
    plwind(xs.low, xs.high, ys.low, ys.high);
    plcol0(axes_colour);
    plwidth(1);
    if (log_y)
        plbox("bcnst", 0, 0, "bcnstvl", decade_step(ys.high - ys.low), 1);
    else
        plbox("bcnst", 0, 0, "bcnstv", 0, 0);
    pllab(chart.x_label.c_str(), chart.y_label.c_str(), chart.title.c_str());

    std::vector<std::string> labels;
    std::vector<PLINT> options, colours, styles, symbol_numbers;
    std::vector<PLFLT> widths, symbol_scales;
    if (chart.reference && (!log_y || chart.reference->y > 0)) {
        const PLFLT y = log_y ? std::log10(chart.reference->y) : chart.reference->y;
        const std::array<PLFLT, 2> x{xs.low, xs.high}, yy{y, y};
        plcol0(reference_colour);
        pllsty(2); // dashed
        plwidth(1.5);
        plline(2, x.data(), yy.data());
        pllsty(1);
        labels.push_back(chart.reference->label);
        options.push_back(PL_LEGEND_LINE);
        colours.push_back(reference_colour);
        styles.push_back(2);
        widths.push_back(1.5);
    }
    for (std::size_t i = 0; i < chart.series.size(); ++i) {
        const auto& d = lines[i];
        if (d.x.empty())
            continue;
        const PLINT colour = colour_of(i);
        const bool markers = chart.series[i].markers || d.x.size() == 1;
        plcol0(colour);
        plwidth(2);
        if (d.x.size() > 1)
            plline(static_cast<PLINT>(d.x.size()), d.x.data(), d.y.data());
        if (markers)
            plstring(static_cast<PLINT>(d.x.size()), d.x.data(), d.y.data(), marker);
        labels.push_back(chart.series[i].label);
        options.push_back((d.x.size() > 1 ? PL_LEGEND_LINE : 0) | (markers ? PL_LEGEND_SYMBOL : 0));
        colours.push_back(colour);
        styles.push_back(1);
        widths.push_back(2);
    }
    if (!labels.empty()) {
        const std::size_t n = labels.size();
        std::vector<const char*> texts, marks;
        for (const auto& l : labels)
            texts.push_back(l.c_str());
        marks.assign(n, marker);
        symbol_numbers.assign(n, 1);
        symbol_scales.assign(n, 1.0);
        const std::vector<PLINT> text_colours(n, axes_colour);
        PLFLT legend_width = 0, legend_height = 0;
        plcol0(axes_colour);
        plwidth(1);
        pllegend(&legend_width, &legend_height, PL_LEGEND_BACKGROUND | PL_LEGEND_BOUNDING_BOX,
                 PL_POSITION_RIGHT | PL_POSITION_OUTSIDE | PL_POSITION_VIEWPORT, 0.02, 0.0, 0.05, 0,
                 axes_colour, 1, 0, 0, static_cast<PLINT>(n), options.data(), 0.8, 0.8, 2.0, 0.0,
                 text_colours.data(), texts.data(), nullptr, nullptr, nullptr, nullptr,
                 colours.data(), styles.data(), widths.data(), colours.data(), symbol_scales.data(),
                 symbol_numbers.data(), marks.data());
    }
    stream.finish();
    out.commit();
}

} // namespace longrun::plot

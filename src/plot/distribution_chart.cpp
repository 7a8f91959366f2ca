#include "distribution_chart.hpp"

#include "io/atomic_output.hpp"

#include <plplot.h>

#include <algorithm>
#include <array>
#include <cmath>
#include <limits>

namespace longrun::plot {

namespace {

// cmap0 (Okabe-Ito colours, told apart also with the common colour-vision
// deficiencies): 0 background, 1 axes and text, then bars, tail line, markers.
constexpr int axes_colour = 1, bar_colour = 2, tail_colour = 3, marker_colour = 4;

void set_palette() {
    const std::array<PLINT, 5> r{255, 0, 0, 0, 213}, g{255, 0, 114, 158, 94},
        b{255, 0, 178, 115, 0};
    plscmap0(r.data(), g.data(), b.data(), static_cast<PLINT>(r.size()));
}

// The points that can be drawn: finite value and probability.
struct Points {
    std::vector<PLFLT> x, pmf, tail;
};

Points drawable(const DistributionChart& c) {
    Points p;
    const std::size_t n = std::min({c.values.size(), c.pmf.size(), c.tail.size()});
    for (std::size_t i = 0; i < n; ++i) {
        if (!std::isfinite(c.values[i]) || !std::isfinite(c.pmf[i]) || !std::isfinite(c.tail[i]))
            continue;
        p.x.push_back(c.values[i]);
        p.pmf.push_back(c.pmf[i]);
        p.tail.push_back(c.tail[i]);
    }
    return p;
}

// The smallest distance between neighbouring values: the width a bar may take.
double smallest_gap(const std::vector<PLFLT>& x) {
    double gap = std::numeric_limits<double>::infinity();
    for (std::size_t i = 1; i < x.size(); ++i)
        if (x[i] > x[i - 1])
            gap = std::min(gap, x[i] - x[i - 1]);
    return std::isfinite(gap) ? gap : 1.0;
}

struct Axis {
    double low = 0, high = 1;
};

Axis x_axis(const std::vector<PLFLT>& x, double gap) {
    if (x.empty())
        return {0, 1};
    const double low = x.front(), high = x.back();
    const double pad = std::max(0.6 * gap, 0.03 * (high - low));
    return {low - pad, high + pad};
}

// Decades per labelled tick: at most about a dozen labels, so that they never overlap.
double decade_step(double decades) {
    return std::max(1.0, std::ceil(decades / 12));
}

constexpr double left = 0.1, right = 0.95;

// Bars where each is at least a few pixels wide; otherwise one line per value
// (5,000 values on 900 pixels): thin bars would be antialiased into a faint haze.
void draw_pmf(const Points& p, const Axis& xs, double gap, int width_px) {
    const double pixels_per_unit = (right - left) * width_px / (xs.high - xs.low);
    const double bar = 0.7 * gap;
    plcol0(bar_colour);
    if (bar * pixels_per_unit >= 3) {
        for (std::size_t i = 0; i < p.x.size(); ++i) {
            if (!(p.pmf[i] > 0))
                continue;
            const std::array<PLFLT, 4> x{p.x[i] - bar / 2, p.x[i] + bar / 2, p.x[i] + bar / 2,
                                         p.x[i] - bar / 2};
            const std::array<PLFLT, 4> y{0, 0, p.pmf[i], p.pmf[i]};
            plfill(4, x.data(), y.data());
        }
    } else {
        plwidth(1);
        for (std::size_t i = 0; i < p.x.size(); ++i)
            if (p.pmf[i] > 0)
                pljoin(p.x[i], 0, p.x[i], p.pmf[i]);
    }
}

// P(X >= x) as a function of real x steps down just after each value, so the line
// runs flat at P(X >= v_i) up to v_{i+1} and drops there.
void draw_tail(const Points& p, double floor, bool point_markers) {
    std::vector<PLFLT> x, y;
    auto log_of = [floor](double v) { return std::log10(std::max(v, floor)); };
    for (std::size_t i = 0; i < p.x.size(); ++i) {
        if (i > 0) {
            x.push_back(p.x[i]);
            y.push_back(log_of(p.tail[i - 1]));
        }
        x.push_back(p.x[i]);
        y.push_back(log_of(p.tail[i]));
    }
    plcol0(tail_colour);
    plwidth(2);
    if (x.size() > 1)
        plline(static_cast<PLINT>(x.size()), x.data(), y.data());
    if (point_markers || p.x.size() == 1) {
        std::vector<PLFLT> px(p.x), py;
        for (double t : p.tail)
            py.push_back(log_of(t));
        plstring(static_cast<PLINT>(px.size()), px.data(), py.data(), "#(850)");
    }
    plwidth(1);
}

} // namespace

void write_distribution_chart(const DistributionChart& chart, const std::string& path,
                              Format format) {
    const Points p = drawable(chart);
    const double gap = smallest_gap(p.x);
    const Axis xs = x_axis(p.x, gap);
    double pmf_high = 0;
    for (double v : p.pmf)
        pmf_high = std::max(pmf_high, v);
    pmf_high = pmf_high > 0 ? 1.08 * pmf_high : 1;
    const double floor = chart.tail_floor > 0 ? chart.tail_floor : 1e-16;
    double tail_low = 0; // log10
    for (double t : p.tail)
        tail_low = std::min(tail_low, std::log10(std::max(t, floor)));
    tail_low = std::min(std::floor(tail_low), -1.0);

    io::AtomicOutput out(path);
    Stream stream(out.temporary(), format, chart.width, chart.height);
    set_palette();
    pladv(0);

    plvpor(left, right, 0.56, 0.92);
    plwind(xs.low, xs.high, 0, pmf_high);
    plcol0(axes_colour);
    plbox("bcnst", 0, 0, "bcnstv", 0, 0);
    pllab("", plot_text(chart.pmf_label).c_str(), plot_text(chart.title).c_str());
    draw_pmf(p, xs, gap, chart.width);
    draw_marker_lines(chart.markers, marker_colour, false);

    plvpor(left, right, 0.09, 0.45);
    plwind(xs.low, xs.high, tail_low, 0.05);
    plcol0(axes_colour);
    plbox("bcnst", 0, 0, "bcnstvl", decade_step(-tail_low), 1);
    pllab(plot_text(chart.x_label).c_str(), plot_text(chart.tail_label).c_str(), "");
    draw_tail(p, floor, p.x.size() <= 60);
    draw_marker_lines(chart.markers, marker_colour, true);

    stream.finish();
    out.commit();
}

} // namespace longrun::plot

#include "marker_lines.hpp"

#include <plplot.h>

#include <array>

namespace longrun::plot {

std::string plot_text(const std::string& text) {
    std::string out;
    out.reserve(text.size());
    for (char c : text) {
        out += c;
        if (c == '#')
            out += '#';
    }
    return out;
}

namespace {

struct WorldPerMillimetre {
    double x = 0, y = 0;
};

// The scale of the current window: PLplot measures text in millimetres.
WorldPerMillimetre world_per_millimetre() {
    PLFLT page_x0 = 0, page_x1 = 0, page_y0 = 0, page_y1 = 0;
    PLFLT view_x0 = 0, view_x1 = 0, view_y0 = 0, view_y1 = 0;
    PLFLT x_low = 0, x_high = 0, y_low = 0, y_high = 0;
    plgspa(&page_x0, &page_x1, &page_y0, &page_y1);
    plgvpd(&view_x0, &view_x1, &view_y0, &view_y1);
    plgvpw(&x_low, &x_high, &y_low, &y_high);
    return {(x_high - x_low) / ((page_x1 - page_x0) * (view_x1 - view_x0)),
            (y_high - y_low) / ((page_y1 - page_y0) * (view_y1 - view_y0))};
}

// PLplot 5.15 does not tell a string's drawn length; digits and most letters of
// its sans-serif font take about 0.65 of the character height (common practice
// for a proportional font), counted in UTF-8 characters.
double estimated_width_mm(const std::string& text, double char_height_mm) {
    std::size_t characters = 0;
    for (unsigned char c : text)
        characters += (c & 0xC0) != 0x80;
    return 0.65 * char_height_mm * static_cast<double>(characters);
}

} // namespace

void draw_marker_lines(const std::vector<MarkerLine>& markers, int colour, bool labelled) {
    PLFLT x_low = 0, x_high = 0, y_low = 0, y_high = 0;
    plgvpw(&x_low, &x_high, &y_low, &y_high);
    const double width = x_high - x_low, height = y_high - y_low;
    // Rows of labels from the top down; after this many rows they start again at
    // the top, far enough apart in x by then in any chart a person can read.
    constexpr int rows = 8;
    const double row_height = 0.075 * height, gap = 0.008 * width;
    const WorldPerMillimetre world = world_per_millimetre();
    PLFLT default_height = 0, char_height = 0;
    plgchr(&default_height, &char_height);
    const double char_height_mm = char_height;
    char_height *= world.y;
    plcol0(colour);
    int row = 0;
    for (const auto& m : markers) {
        if (!(m.x >= x_low && m.x <= x_high))
            continue;
        pllsty(2);
        plwidth(1.5);
        const std::array<PLFLT, 2> x{m.x, m.x}, y{y_low, y_high};
        plline(2, x.data(), y.data());
        pllsty(1);
        if (!labelled || m.label.empty())
            continue;
        const double y_text = y_high - (row % rows + 0.8) * row_height;
        // Right of the line in the left two thirds, left of it near the right edge.
        const bool right_side = m.x < x_low + 0.66 * width;
        const double x_text = right_side ? m.x + gap : m.x - gap;
        const std::string text = plot_text(m.label);
        // On a background patch, so that the label stays legible where it crosses
        // a curve or another marker's line.
        const double text_width = estimated_width_mm(m.label, char_height_mm) * world.x + gap;
        const double x0 = right_side ? x_text - gap / 2 : x_text - text_width + gap / 2;
        const double y0 = y_text - 0.75 * char_height, y1 = y_text + 0.75 * char_height;
        const std::array<PLFLT, 4> bx{x0, x0 + text_width, x0 + text_width, x0}, by{y0, y0, y1, y1};
        plcol0(0);
        plfill(4, bx.data(), by.data());
        plcol0(colour);
        plptex(x_text, y_text, 1, 0, right_side ? 0 : 1, text.c_str());
        ++row;
    }
    plwidth(1);
}

} // namespace longrun::plot

// Vertical lines at chosen x positions, each with a short label, drawn into the
// window of the current PLplot stream: how a chart points at a quantile
// ("99.9% = 41") or any other threshold on its x axis.
#pragma once

#include <string>
#include <vector>

namespace longrun::plot {

struct MarkerLine {
    double x = 0;
    std::string label; // plain text; PLplot's escape character is handled here
};

// Draws every marker that falls inside the current window as a dashed line in
// `colour` (a cmap0 index). With `labelled`, the labels go in staggered rows from
// the top edge down, each beside its line and on whichever side has room, so
// that markers close together still have readable labels.
void draw_marker_lines(const std::vector<MarkerLine>& markers, int colour, bool labelled);

// `text` with PLplot's escape character doubled, so that a user's '#' prints as is.
std::string plot_text(const std::string& text);

} // namespace longrun::plot

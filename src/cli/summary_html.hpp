// The summary as one HTML file that carries everything it shows (pictures as
// data: URIs, styles inline, no script): something a user can mail to a
// colleague and open anywhere, offline.
#pragma once

#include "summarize_job.hpp"

#include <string>

namespace longrun::cli {

// Serial (rank 0). Renders the figures of summary_plots.hpp, then writes `path`
// under a temporary name and renames it when complete. Throws OutputError and
// leaves nothing under `path` when anything fails.
void write_summary_html(const SummaryReport& report, const std::string& path);

// `text` safe as HTML element content and attribute value.
std::string html_escape(const std::string& text);

} // namespace longrun::cli

#include "summary_html.hpp"

#include "base64.hpp"
#include "io/atomic_output.hpp"
#include "io/error.hpp"
#include "summary_plots.hpp"

#include <fmt/format.h>

#include <cerrno>
#include <cstring>
#include <filesystem>
#include <fstream>

namespace longrun::cli {

std::string html_escape(const std::string& text) {
    std::string out;
    out.reserve(text.size());
    for (char c : text) {
        switch (c) {
        case '&':
            out += "&amp;";
            break;
        case '<':
            out += "&lt;";
            break;
        case '>':
            out += "&gt;";
            break;
        case '"':
            out += "&quot;";
            break;
        case '\'':
            out += "&#39;";
            break;
        default:
            out += c;
        }
    }
    return out;
}

namespace {

std::string number(double v) {
    return fmt::format("{:.6g}", v);
}

std::string percent(double level) {
    return fmt::format("{:g}%", level * 100);
}

// Print-friendly, readable without any font or file from elsewhere.
constexpr const char* style = R"(
body { font-family: sans-serif; margin: 1.5em auto; max-width: 68em; padding: 0 1em;
       color: #1a1a1a; line-height: 1.4; }
h1 { font-size: 1.6em; margin-bottom: 0.2em; }
h2 { font-size: 1.25em; margin-top: 1.6em; border-bottom: 1px solid #ccc; }
.caution { border: 3px solid #b35900; background: #fff4e5; padding: 0.8em 1em;
           font-size: 1.05em; margin: 1em 0; }
table { border-collapse: collapse; margin: 0.5em 0; }
th, td { border: 1px solid #bbb; padding: 0.25em 0.6em; text-align: left; vertical-align: top; }
th { background: #f0f0f0; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
pre { background: #f7f7f7; border: 1px solid #ddd; padding: 0.6em; overflow-x: auto; }
figure { margin: 1em 0; }
figure img { max-width: 100%; height: auto; border: 1px solid #ddd; }
figcaption { font-size: 0.95em; color: #444; }
.ok { color: #006633; font-weight: bold; }
.bad { color: #b30000; font-weight: bold; }
)";

class Page {
  public:
    void raw(const std::string& s) { html_ += s; }
    void text(const std::string& s) { html_ += html_escape(s); }
    void heading(const std::string& id, const std::string& title) {
        html_ += fmt::format("<section id=\"{}\">\n<h2>{}</h2>\n", id, html_escape(title));
    }
    void end_section() { html_ += "</section>\n"; }
    void fact(const std::string& name, const std::string& value_html) {
        html_ += fmt::format("<tr><th scope=\"row\">{}</th><td>{}</td></tr>\n", html_escape(name),
                             value_html);
    }
    void header_row(std::initializer_list<const char*> names) {
        html_ += "<thead><tr>";
        for (const char* n : names)
            html_ += fmt::format("<th scope=\"col\">{}</th>", n);
        html_ += "</tr></thead>\n<tbody>\n";
    }
    const std::string& html() const { return html_; }

  private:
    std::string html_;
};

void chain_section(Page& page, const SummaryReport& r) {
    page.heading("chain", "Chain");
    page.raw("<table class=\"facts\">\n");
    page.fact("Result file", html_escape(r.result_path));
    page.fact("Chain file", html_escape(r.chain_path));
    page.fact("Kind", html_escape(r.kind == "ctmc"   ? "continuous time (ctmc)"
                                  : r.kind == "dtmc" ? "discrete time (dtmc)"
                                                     : r.kind));
    page.fact("States", fmt::format("{}", r.states));
    page.fact("Transitions", fmt::format("{}", r.transitions));
    page.raw("</table>\n");
    page.end_section();
}

void model_section(Page& page, const SummaryReport& r) {
    if (r.model_file.empty() && r.model_text.empty() && r.parameters.empty())
        return;
    page.heading("model", "Model");
    if (!r.model_file.empty()) {
        page.raw("<p>Description file: <code>");
        page.text(r.model_file);
        page.raw("</code></p>\n");
    }
    if (!r.parameters.empty()) {
        page.raw("<table class=\"data\" id=\"parameters\">\n");
        page.header_row({"Parameter", "Value"});
        for (const auto& [name, value] : r.parameters)
            page.raw(fmt::format("<tr><td>{}</td><td class=\"num\">{}</td></tr>\n",
                                 html_escape(name), number(value)));
        page.raw("</tbody></table>\n");
    }
    if (!r.model_text.empty()) {
        page.raw("<pre class=\"model\">");
        page.text(r.model_text);
        page.raw("</pre>\n");
    }
    page.end_section();
}

void certificate_section(Page& page, const SolveRecord& s) {
    page.heading("certificate", "Certificate");
    page.raw("<table class=\"facts\">\n");
    page.fact("Method", html_escape(s.method));
    const bool within = s.residual <= s.tolerance;
    page.fact("Residual",
              fmt::format("{:.3e} {} tolerance {:.3e}{}", s.residual, within ? "&le;" : "&gt;",
                          s.tolerance,
                          s.residual_definition.empty()
                              ? std::string()
                              : fmt::format(" ({})", html_escape(s.residual_definition))));
    page.fact("Converged",
              s.converged ? "<span class=\"ok\">yes</span>" : "<span class=\"bad\">no</span>");
    page.fact("Iterations", fmt::format("{}", s.iterations));
    page.fact("Ranks", fmt::format("{}", s.ranks));
    page.fact("Wall time", fmt::format("{:.3g} s", s.wall_seconds));
    page.raw("</table>\n");
    page.end_section();
}

std::string quantiles_cell(const io::MeasureRecord& m) {
    std::string cell;
    for (const auto& q : m.quantiles)
        cell += fmt::format("{}{}: {:g}", cell.empty() ? "" : "<br>", percent(q.level), q.value);
    return cell;
}

std::string given_cell(const io::MeasureRecord& m) {
    std::string cell;
    for (const auto& g : m.given) {
        const std::string mean = g.mean ? number(*g.mean) : "undefined";
        cell +=
            fmt::format("{}E[{} | {}] = {} (P = {})", cell.empty() ? "" : "<br>",
                        html_escape(m.name), html_escape(g.condition), mean, number(g.probability));
    }
    return cell;
}

std::string bounds_cell(const io::MeasureRecord& m) {
    std::string cell;
    auto add = [&](const char* side, const std::optional<double>& bound,
                   const std::optional<double>& mass) {
        if (!mass)
            return;
        cell +=
            fmt::format("{}{}{}: P = {}", cell.empty() ? "" : "<br>", side,
                        bound ? fmt::format(" {}", number(*bound)) : std::string(), number(*mass));
    };
    add("lower", m.lower_bound, m.mass_at_lower);
    add("upper", m.upper_bound, m.mass_at_upper);
    return cell;
}

void measures_section(Page& page, const io::SummaryRecord& s) {
    page.heading("measures", "Measures");
    if (s.measures.empty()) {
        page.raw("<p>None.</p>\n");
        page.end_section();
        return;
    }
    page.raw("<table class=\"data\">\n");
    page.header_row({"Measure", "From", "Mean", "Std", "Quantiles", "Conditional means",
                     "Mass at declared bounds"});
    for (const auto& m : s.measures)
        page.raw(fmt::format("<tr><td>{}</td><td>{}</td><td class=\"num\">{}</td>"
                             "<td class=\"num\">{}</td><td>{}</td><td>{}</td><td>{}</td></tr>\n",
                             html_escape(m.name), html_escape(m.origin), number(m.mean),
                             number(m.std), quantiles_cell(m), given_cell(m), bounds_cell(m)));
    page.raw("</tbody></table>\n");
    page.end_section();
}

void probabilities_section(Page& page, const io::SummaryRecord& s) {
    if (s.probabilities.empty())
        return;
    page.heading("probabilities", "Probabilities");
    page.raw("<table class=\"data\">\n");
    page.header_row({"Name", "Condition", "Probability"});
    for (const auto& p : s.probabilities)
        page.raw(fmt::format("<tr><td>{}</td><td><code>{}</code></td><td class=\"num\">{}</td>"
                             "</tr>\n",
                             html_escape(p.name), html_escape(p.condition), number(p.probability)));
    page.raw("</tbody></table>\n");
    page.end_section();
}

void events_section(Page& page, const io::SummaryRecord& s) {
    if (s.events.empty())
        return;
    page.heading("events", "Event rates");
    page.raw("<table class=\"data\">\n");
    page.header_row({"Event", "Long-run rate", "Unit", "Found from"});
    for (const auto& e : s.events) {
        std::string from = html_escape(e.source);
        if (!e.expression.empty())
            from += ": <code>" + html_escape(e.expression) + "</code>";
        page.raw(fmt::format("<tr><td>{}</td><td class=\"num\">{}</td><td>{}</td><td>{}</td>"
                             "</tr>\n",
                             html_escape(e.name), number(e.rate), html_escape(s.rate_unit), from));
    }
    page.raw("</tbody></table>\n");
    page.end_section();
}

void likely_states_section(Page& page, const io::SummaryRecord& s) {
    if (s.likely_states.empty())
        return;
    page.heading("likely-states", "Most likely states");
    page.raw("<table class=\"data\">\n");
    page.header_row({"Rank", "State index", "Probability", "Variables"});
    for (std::size_t i = 0; i < s.likely_states.size(); ++i) {
        const auto& st = s.likely_states[i];
        std::string vars;
        for (const auto& [name, value] : st.variables)
            vars += fmt::format("{}{} = {:g}", vars.empty() ? "" : ", ", html_escape(name), value);
        page.raw(fmt::format("<tr><td class=\"num\">{}</td><td class=\"num\">{}</td>"
                             "<td class=\"num\">{}</td><td>{}</td></tr>\n",
                             i + 1, st.index, number(st.probability), vars));
    }
    page.raw("</tbody></table>\n");
    page.end_section();
}

void warnings_section(Page& page, const std::vector<std::string>& warnings) {
    page.heading("warnings", "Warnings");
    if (warnings.empty()) {
        page.raw("<p>None.</p>\n");
    } else {
        page.raw("<ul>\n");
        for (const auto& w : warnings)
            page.raw("<li>" + html_escape(w) + "</li>\n");
        page.raw("</ul>\n");
    }
    page.end_section();
}

void plots_section(Page& page, const std::vector<SummaryFigure>& figures,
                   const std::vector<std::string>& pngs) {
    if (figures.empty())
        return;
    page.heading("plots", "Plots");
    for (std::size_t i = 0; i < figures.size(); ++i) {
        const auto& f = figures[i];
        const auto [width, height] = std::visit(
            [](const auto& c) {
                return std::pair{c.width, c.height};
            },
            f.chart);
        page.raw(fmt::format("<figure id=\"figure-{}\">\n<img src=\"data:image/png;base64,{}\" "
                             "width=\"{}\" height=\"{}\" alt=\"{}\">\n<figcaption>{}</figcaption>\n"
                             "</figure>\n",
                             html_escape(f.stem), base64_encode(pngs[i]), width, height,
                             html_escape(f.caption), html_escape(f.caption)));
    }
    page.end_section();
}

} // namespace

void write_summary_html(const SummaryReport& report, const std::string& path) {
    // Every picture first: a failure there must not leave a half-made page.
    const auto figures = summary_figures(report);
    std::vector<std::string> pngs;
    for (const auto& f : figures)
        pngs.push_back(render_png(f));

    const std::string name = std::filesystem::path(report.result_path).filename().string();
    Page page;
    page.raw("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
             "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n");
    page.raw("<title>Long-run summary: " + html_escape(name) + "</title>\n");
    page.raw(std::string("<style>") + style + "</style>\n</head>\n<body>\n");
    page.raw("<h1>Long-run summary: " + html_escape(name) + "</h1>\n");
    page.raw("<p>The stationary (long-run) distribution of the chain below, and what follows "
             "from it.</p>\n");
    page.raw("<div class=\"caution\" id=\"caution\" role=\"note\"><strong>");
    page.text(safety_caution);
    page.raw("</strong></div>\n");
    chain_section(page, report);
    model_section(page, report);
    certificate_section(page, report.solve);
    measures_section(page, report.summary);
    probabilities_section(page, report.summary);
    events_section(page, report.summary);
    likely_states_section(page, report.summary);
    warnings_section(page, report.warnings);
    plots_section(page, figures, pngs);
    page.raw("</body>\n</html>\n");

    io::AtomicOutput out(path);
    {
        std::ofstream file(out.temporary(), std::ios::binary);
        if (!file)
            throw OutputError(path + ": cannot create: " + std::strerror(errno));
        file << page.html();
        file.close();
        if (!file)
            throw OutputError(path + ": cannot write: " + std::strerror(errno));
    }
    out.commit();
}

} // namespace longrun::cli

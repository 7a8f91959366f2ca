#include "sweep_output.hpp"
#include "text_file.hpp"

#include "io/error.hpp"
#include "plot/line_chart.hpp"
#include "summary/error_bound.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <map>
#include <regex>
#include <sstream>

namespace longrun::cli {

namespace {

using Json = nlohmann::ordered_json;

constexpr const char* table_schema = "longrun.sweep";
constexpr const char* point_schema = "longrun.sweep-point";
constexpr int schema_version = 1;

std::string csv_field(const std::string& s) {
    if (s.find_first_of(",\"\n") == std::string::npos)
        return s;
    std::string quoted = "\"";
    for (const char c : s)
        quoted += c == '"' ? std::string("\"\"") : std::string(1, c);
    return quoted + "\"";
}

// Full precision in files (the CSV is read back by programs); none for a missing cell.
std::string exact(double v) {
    // The shortest text that reads back as the same double.
    return std::isfinite(v) ? fmt::format("{}", v) : "";
}

Json number_or_null(double v) {
    return std::isfinite(v) ? Json(v) : Json(nullptr);
}

// A tail or probability column, which the error bound may leave unresolved.
bool is_probability(const std::string& column) {
    return column.rfind("P(", 0) == 0;
}

bool unresolved(const SweepRow& row, const std::string& column, double v) {
    return row.error_bound && is_probability(column) && std::isfinite(v) &&
           !summary::probability_resolved(v, *row.error_bound);
}

Json row_json(const SweepRow& row) {
    Json cells = Json::object();
    Json marked = Json::array();
    for (const auto& [name, value] : row.cells) {
        cells[name] = number_or_null(value);
        if (unresolved(row, name, value))
            marked.push_back(name);
    }
    return Json{{"index", row.index},
                {"value", row.value},
                {"states", row.states},
                {"method", row.method},
                {"residual", row.residual},
                {"error_bound", row.error_bound ? number_or_null(*row.error_bound) : Json(nullptr)},
                {"unresolved", marked},
                {"seconds", row.seconds},
                {"warm_start", row.warm},
                {"start", row.start},
                {"columns", cells},
                {"bound_mass", row.bound_mass},
                {"bound_state", row.bound_state}};
}

SweepRow row_from_json(const Json& j) {
    SweepRow row;
    row.index = j.at("index").get<std::size_t>();
    row.value = j.at("value").get<double>();
    row.states = j.at("states").get<std::uint64_t>();
    row.method = j.at("method").get<std::string>();
    row.residual = j.at("residual").get<double>();
    row.seconds = j.at("seconds").get<double>();
    row.warm = j.at("warm_start").get<bool>();
    row.start = j.at("start").get<std::string>();
    if (j.contains("error_bound") && j.at("error_bound").is_number())
        row.error_bound = j.at("error_bound").get<double>();
    row.bound_mass = j.value("bound_mass", 0.0);
    row.bound_state = j.value("bound_state", std::string());
    for (const auto& [name, value] : j.at("columns").items())
        row.cells.emplace_back(name, value.is_null() ? NAN : value.get<double>());
    return row;
}

Json definition_json(const SweepTable& t) {
    Json until = nullptr;
    if (t.until)
        until = Json{{"text", t.until->text},
                     {"column", t.until->column},
                     {"relation", t.until->relation},
                     {"threshold", t.until->threshold}};
    return Json{{"model", t.model_file},
                {"parameter", t.axis.parameter},
                {"values", t.axis.values},
                {"until", until}};
}

// "P(load>=40)" -> "P-load-ge-40": no shell metacharacters in file names.
std::string file_safe(const std::string& column) {
    static const std::vector<std::pair<std::string, std::string>> words = {
        {">=", "-ge-"}, {"<=", "-le-"}, {"==", "-eq-"}, {"!=", "-ne-"}, {">", "-gt-"},
        {"<", "-lt-"},  {"(", "-"},     {")", ""},      {"=", "-"}};
    std::string out;
    for (std::size_t i = 0; i < column.size();) {
        bool replaced = false;
        for (const auto& [from, to] : words)
            if (column.compare(i, from.size(), from) == 0) {
                out += to;
                i += from.size();
                replaced = true;
                break;
            }
        if (replaced)
            continue;
        const char c = column[i++];
        out += std::isalnum(static_cast<unsigned char>(c)) || c == '.' || c == '_' || c == '-'
                   ? c
                   : '_';
    }
    // No doubled or trailing separators.
    std::string tidy;
    for (const char c : out)
        if (!(c == '-' && (tidy.empty() || tidy.back() == '-')))
            tidy += c;
    while (!tidy.empty() && tidy.back() == '-')
        tidy.pop_back();
    return tidy.empty() ? "column" : tidy;
}

} // namespace

std::string sweep_text(const SweepTable& t) {
    std::vector<std::string> header = {t.axis.parameter, "states", "method", "residual",
                                       "error_bound"};
    header.insert(header.end(), t.columns.begin(), t.columns.end());
    std::vector<std::vector<std::string>> cells;
    // The smallest unresolved cell: the --tol it needs resolves every marked one.
    double smallest_unresolved = INFINITY;
    for (const auto& row : t.rows) {
        std::vector<std::string> line = {fmt::format("{:g}", row.value),
                                         fmt::format("{}", row.states), row.method,
                                         fmt::format("{:.2e}", row.residual),
                                         row.error_bound && std::isfinite(*row.error_bound)
                                             ? fmt::format("{:.1e}", *row.error_bound)
                                             : "-"};
        for (const auto& column : t.columns) {
            const auto v = row.cell(column);
            const bool mark = v && unresolved(row, column, *v);
            if (mark)
                smallest_unresolved = std::min(smallest_unresolved, *v);
            line.push_back(v && std::isfinite(*v) ? fmt::format("{:.6g}{}", *v, mark ? "?" : "")
                                                  : "-");
        }
        cells.push_back(std::move(line));
    }
    std::vector<std::size_t> width(header.size());
    for (std::size_t c = 0; c < header.size(); ++c) {
        width[c] = header[c].size();
        for (const auto& line : cells)
            width[c] = std::max(width[c], line[c].size());
    }
    std::string out;
    auto print = [&](const std::vector<std::string>& line) {
        std::string text;
        for (std::size_t c = 0; c < line.size(); ++c)
            // Text left, numbers right, as tables of figures are read.
            text += (c == 2 ? fmt::format("{:<{}}", line[c], width[c])
                            : fmt::format("{:>{}}", line[c], width[c])) +
                    (c + 1 < line.size() ? "  " : "");
        out += text + "\n";
    };
    print(header);
    for (const auto& line : cells)
        print(line);
    if (std::isfinite(smallest_unresolved)) {
        const auto tol = summary::tol_to_resolve(smallest_unresolved);
        out += fmt::format("?: unresolved, below twice that point's error_bound (even the first "
                           "digit may be wrong){}\n",
                           tol ? fmt::format("; --tol {:.0e} resolves every marked cell", *tol)
                               : std::string());
    }
    if (t.until)
        out += t.crossing.sentence + "\n";
    return out;
}

std::string sweep_csv(const SweepTable& t) {
    std::string out = csv_field(t.axis.parameter) + ",states,method,residual,error_bound";
    for (const auto& column : t.columns)
        out += fmt::format(",{}", csv_field(column));
    out += "\n";
    for (const auto& row : t.rows) {
        out += fmt::format("{},{},{},{},{}", exact(row.value), row.states, csv_field(row.method),
                           exact(row.residual), exact(row.error_bound.value_or(NAN)));
        for (const auto& column : t.columns)
            out += fmt::format(",{}", exact(row.cell(column).value_or(NAN)));
        out += "\n";
    }
    return out;
}

nlohmann::ordered_json sweep_json(const SweepTable& t) {
    Json j = {{"schema", table_schema}, {"schema_version", schema_version}};
    const Json definition = definition_json(t);
    for (const auto& [key, value] : definition.items())
        j[key] = value;
    j["columns"] = t.columns;
    Json rows = Json::array();
    for (const auto& row : t.rows)
        rows.push_back(row_json(row));
    j["rows"] = rows;
    if (t.until) {
        Json crossing = {{"crossed", t.crossing.crossed}, {"sentence", t.crossing.sentence}};
        crossing["between"] =
            t.crossing.before && t.crossing.at
                ? Json{t.rows[*t.crossing.before].value, t.rows[*t.crossing.at].value}
                : Json(nullptr);
        crossing["interpolated"] =
            t.crossing.interpolated ? Json(*t.crossing.interpolated) : Json(nullptr);
        j["crossing"] = crossing;
    }
    return j;
}

std::vector<std::string> sweep_plot_names(const SweepTable& t, const std::string& prefix) {
    std::vector<std::string> names;
    for (const auto& column : t.columns) {
        const std::string base = prefix + "-" + file_safe(column);
        std::string name = base;
        for (int k = 2; std::find(names.begin(), names.end(), name) != names.end(); ++k)
            name = fmt::format("{}-{}", base, k);
        names.push_back(name);
    }
    return names;
}

std::vector<std::string> write_sweep_plots(const SweepTable& t, const std::string& prefix) {
    std::vector<std::string> written;
    const auto names = sweep_plot_names(t, prefix);
    for (std::size_t c = 0; c < t.columns.size(); ++c) {
        const std::string& column = t.columns[c];
        plot::LineChart chart;
        chart.title = column + " against " + t.axis.parameter;
        chart.x_label = t.axis.parameter;
        chart.y_label = column;
        chart.x_from_zero = false;
        plot::Series s;
        s.label = column;
        s.markers = true;
        for (const auto& row : t.rows)
            if (const auto v = row.cell(column); v && std::isfinite(*v)) {
                s.x.push_back(row.value);
                s.y.push_back(*v);
            }
        if (s.x.empty())
            continue;
        // Probabilities of rare events span decades: a log axis shows them all.
        const auto [lo, hi] = std::minmax_element(s.y.begin(), s.y.end());
        chart.log_y = column.rfind("P(", 0) == 0 && *lo > 0 && *hi >= 100 * *lo;
        chart.series.push_back(std::move(s));
        if (t.until && t.until->column == column)
            chart.reference =
                plot::ReferenceLine{t.until->threshold, fmt::format("{:g}", t.until->threshold)};
        for (const auto format : {plot::Format::png, plot::Format::svg}) {
            const std::string file = names[c] + plot::extension(format);
            plot::write_chart(chart, file, format);
            written.push_back(file);
        }
    }
    return written;
}

std::string point_file_name(const std::string& prefix, std::size_t index) {
    return fmt::format("{}.point-{}.json", prefix, index);
}

void write_point_file(const std::string& prefix, const SweepTable& one_point) {
    if (one_point.rows.size() != 1)
        throw OutputError("a point file holds exactly one point");
    Json j = {{"schema", point_schema}, {"schema_version", schema_version}};
    const Json definition = definition_json(one_point);
    for (const auto& [key, value] : definition.items())
        j[key] = value;
    j["row"] = row_json(one_point.rows.front());
    write_text_file(point_file_name(prefix, one_point.rows.front().index), j.dump(2) + "\n");
}

SweepTable gather_point_files(const std::string& prefix) {
    namespace fs = std::filesystem;
    fs::path folder = fs::path(prefix).parent_path();
    if (folder.empty())
        folder = ".";
    const std::string stem = fs::path(prefix).filename().string();
    std::error_code ec;
    if (!fs::is_directory(folder, ec))
        throw InputError(fmt::format("--gather {}: no folder {}", prefix, folder.string()));
    // The stem is matched literally: it may hold regex characters.
    const std::regex point(R"(\.point-([0-9]+)\.json)");
    std::map<std::size_t, fs::path> files;
    for (const auto& entry : fs::directory_iterator(folder, ec)) {
        const std::string name = entry.path().filename().string();
        std::smatch m;
        if (name.size() > stem.size() && name.compare(0, stem.size(), stem) == 0) {
            const std::string rest = name.substr(stem.size());
            if (std::regex_match(rest, m, point))
                files[std::stoul(m[1].str())] = entry.path();
        }
    }
    if (files.empty())
        throw InputError(
            fmt::format("--gather {}: no point files {}.point-*.json", prefix, prefix));

    SweepTable table;
    std::optional<Json> definition;
    std::map<std::size_t, SweepRow> rows;
    for (const auto& [index, path] : files) {
        Json j;
        try {
            std::ifstream in(path);
            j = Json::parse(in);
            if (j.at("schema") != point_schema)
                throw InputError(path.string() + ": not a sweep point file");
            const Json here = {{"model", j.at("model")},
                               {"parameter", j.at("parameter")},
                               {"values", j.at("values")},
                               {"until", j.at("until")}};
            if (!definition) {
                definition = here;
                table.model_file = here["model"].get<std::string>();
                table.axis.parameter = here["parameter"].get<std::string>();
                table.axis.values = here["values"].get<std::vector<double>>();
                if (!here["until"].is_null()) {
                    SweepCondition c;
                    c.text = here["until"].at("text").get<std::string>();
                    c.column = here["until"].at("column").get<std::string>();
                    c.relation = here["until"].at("relation").get<std::string>();
                    c.threshold = here["until"].at("threshold").get<double>();
                    table.until = c;
                }
            } else if (here != *definition) {
                throw InputError(fmt::format("{}: belongs to another sweep than {} (model, "
                                             "parameter, values or --until differ)",
                                             path.string(), files.begin()->second.string()));
            }
            SweepRow row = row_from_json(j.at("row"));
            if (row.index != index || index >= table.axis.values.size())
                throw InputError(path.string() + ": the point's index does not match its name");
            rows[index] = std::move(row);
        } catch (const nlohmann::json::exception& e) {
            throw InputError(path.string() + ": not a readable sweep point file (" + e.what() +
                             ")");
        }
    }

    // The rows one run would have made: in order, up to the crossing.
    std::vector<std::size_t> missing;
    for (std::size_t i = 0; i < table.axis.values.size(); ++i) {
        const auto found = rows.find(i);
        if (found == rows.end()) {
            missing.push_back(i);
            continue;
        }
        if (!missing.empty())
            continue;
        table.rows.push_back(found->second);
        if (table.until)
            if (const auto y = table.rows.back().cell(table.until->column);
                y && table.until->holds(*y))
                break;
    }
    const bool crossed_before_gap =
        table.until && !table.rows.empty() && table.rows.back().cell(table.until->column) &&
        table.until->holds(*table.rows.back().cell(table.until->column));
    if (!missing.empty() && !crossed_before_gap) {
        std::string list;
        for (std::size_t k = 0; k < missing.size() && k < 20; ++k)
            list += (list.empty() ? "" : ", ") + std::to_string(missing[k]);
        if (missing.size() > 20)
            list += fmt::format(" and {} more", missing.size() - 20);
        throw InputError(fmt::format("--gather {}: points {} of 0..{} have no point file yet "
                                     "(compute them with --only INDEX)",
                                     prefix, list, table.axis.values.size() - 1));
    }
    table.columns = columns_of(table.rows);
    if (table.until)
        table.crossing = find_crossing(table.axis.parameter, table.rows, *table.until);
    return table;
}

} // namespace longrun::cli

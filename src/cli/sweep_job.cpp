#include "sweep_job.hpp"
#include "solve_pipeline.hpp"
#include "summarize_job.hpp"

#include "io/chain_file.hpp"
#include "io/mpi_agree.hpp"
#include "model/explore.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdlib>
#include <filesystem>

namespace longrun::cli {

namespace {

std::string trim(const std::string& s) {
    const auto b = s.find_first_not_of(" \t");
    if (b == std::string::npos)
        return {};
    return s.substr(b, s.find_last_not_of(" \t") - b + 1);
}

std::optional<double> number(const std::string& text) {
    const std::string t = trim(text);
    if (t.empty())
        return std::nullopt;
    char* end = nullptr;
    const double v = std::strtod(t.c_str(), &end);
    if (end != t.c_str() + t.size() || !std::isfinite(v))
        return std::nullopt;
    return v;
}

// Twelve significant digits: 0.1 * 3 is shown, passed to the model and written as 0.3.
double tidy(double v) {
    return std::strtod(fmt::format("{:.12g}", v).c_str(), nullptr);
}

// "name=..." where the '=' is not part of ==, >=, <= or !=; else the whole text.
std::string defined_name(const std::string& text) {
    for (std::size_t i = 0; i < text.size(); ++i) {
        if (text[i] != '=')
            continue;
        const bool joined = (i > 0 && std::string("=<>!").find(text[i - 1]) != std::string::npos) ||
                            (i + 1 < text.size() && text[i + 1] == '=');
        if (joined) {
            ++i; // skip the second character of the operator
            continue;
        }
        return trim(text.substr(0, i));
    }
    return trim(text);
}

struct QuantileAsk {
    std::optional<std::string> measure; // none: every measure
    double level = 0;
};

std::vector<QuantileAsk> quantile_asks(const std::vector<std::string>& quantiles) {
    std::vector<QuantileAsk> asks;
    for (const auto& q : quantiles) {
        const auto colon = q.rfind(':');
        QuantileAsk a;
        const auto level = number(colon == std::string::npos ? q : q.substr(colon + 1));
        if (!level || *level <= 0 || *level >= 1)
            throw UsageError(fmt::format(
                "--quantile {}: expected name:level or level, with level in (0, 1)", q));
        a.level = *level;
        if (colon != std::string::npos)
            a.measure = trim(q.substr(0, colon));
        asks.push_back(a);
    }
    return asks;
}

std::string quantile_column(double level, const std::string& measure) {
    return fmt::format("q{:g}({})", level, measure);
}

// The columns a summary of this model will have, to refuse an --until naming none
// of them before the first point is computed.
std::vector<std::string> expected_columns(const model::Model& m, const SweepRequest& r) {
    std::vector<std::string> measures;
    for (const auto& v : m.variables)
        measures.push_back(v.name);
    for (const auto& x : m.measures)
        measures.push_back(x.name);
    for (const auto& x : r.measures)
        measures.push_back(defined_name(x));
    std::vector<std::string> columns;
    const auto asks = quantile_asks(r.quantiles);
    for (const auto& name : measures) {
        columns.push_back("mean(" + name + ")");
        for (const auto& a : asks)
            if (!a.measure || *a.measure == name)
                columns.push_back(quantile_column(a.level, name));
    }
    for (const auto& t : r.tails)
        columns.push_back("P(" + defined_name(t) + ")");
    for (const auto& e : m.events)
        columns.push_back("rate(" + e.name + ")");
    for (const auto& x : r.rates)
        columns.push_back(defined_name(x));
    columns.push_back(std::string("rate(") + model::several_events_label + ")"); // kept last
    return columns;
}

std::string joined(const std::vector<std::string>& names) {
    std::string out;
    for (const auto& n : names)
        out += (out.empty() ? "" : ", ") + n;
    return out;
}

std::vector<std::pair<std::string, double>> cells_of(const SummaryReport& s,
                                                     const std::vector<QuantileAsk>& asks) {
    std::vector<std::pair<std::string, double>> cells;
    for (const auto& m : s.summary.measures) {
        cells.emplace_back("mean(" + m.name + ")", m.mean);
        for (const auto& q : m.quantiles)
            for (const auto& a : asks)
                if ((!a.measure || *a.measure == m.name) &&
                    std::abs(q.level - a.level) <= 1e-12 * a.level) {
                    cells.emplace_back(quantile_column(a.level, m.name), q.value);
                    break;
                }
    }
    for (const auto& p : s.summary.probabilities)
        cells.emplace_back("P(" + p.name + ")", p.probability);
    for (const auto& e : s.summary.events)
        cells.emplace_back(e.source == "--rate" ? e.name : "rate(" + e.name + ")", e.rate);
    return cells;
}

// The same error with the point it happened at in front.
[[noreturn]] void rethrow_at(const Error& e, const std::string& where) {
    Error out(e.code(), where + ": " + e.what());
    if (e.agreed())
        out.mark_agreed();
    throw out;
}

void remove_quietly(const std::string& path) {
    std::error_code ec;
    std::filesystem::remove(path, ec);
}

// The points' files in the work folder: removed as the sweep goes and, unless
// kept, whatever is left when it ends, by an error too (rank 0 removes; no MPI).
class WorkFiles {
  public:
    WorkFiles(std::string folder, bool remove) : folder_(std::move(folder)), remove_(remove) {}
    WorkFiles(const WorkFiles&) = delete;
    WorkFiles& operator=(const WorkFiles&) = delete;
    ~WorkFiles() { finish(); }
    // Removes the files now (the destructor does it on an exception's way out).
    void finish() {
        if (!remove_)
            return;
        remove_ = false;
        for (const auto& f : files_)
            remove_quietly(f);
        // Other array tasks may still use the folder: only an empty one goes.
        std::error_code ec;
        std::filesystem::remove(folder_, ec);
    }
    void add(const std::string& path) { files_.push_back(path); }
    void drop(const std::string& path) {
        if (!remove_)
            return;
        remove_quietly(path);
        files_.erase(std::remove(files_.begin(), files_.end(), path), files_.end());
    }

  private:
    std::string folder_;
    bool remove_;
    std::vector<std::string> files_;
};

} // namespace

SweepAxis parse_vary(const std::string& text) {
    const auto eq = text.find('=');
    const std::string example = "e.g. --vary arrival=2:6:0.25 or --vary arrival=2,3,5";
    if (eq == std::string::npos || trim(text.substr(0, eq)).empty())
        throw UsageError(fmt::format("--vary {}: expected name=start:stop:step or name=a,b,c ({})",
                                     text, example));
    SweepAxis axis;
    axis.parameter = trim(text.substr(0, eq));
    const std::string rest = text.substr(eq + 1);
    constexpr std::size_t max_points = max_sweep_points;
    if (rest.find(':') != std::string::npos) {
        std::vector<std::optional<double>> parts;
        std::size_t from = 0;
        for (;;) {
            const auto colon = rest.find(':', from);
            parts.push_back(number(rest.substr(from, colon - from)));
            if (colon == std::string::npos)
                break;
            from = colon + 1;
        }
        if (parts.size() != 3 || !parts[0] || !parts[1] || !parts[2])
            throw UsageError(fmt::format(
                "--vary {}: expected start:stop:step with three numbers ({})", text, example));
        const double start = *parts[0], stop = *parts[1], step = *parts[2];
        if (step == 0 || (stop - start) * step < 0)
            throw UsageError(fmt::format("--vary {}: the step {:g} never takes {:g} to {:g}", text,
                                         step, start, stop));
        // Stop counts as reached within rounding (0.1 steps are not exact in binary).
        const double steps = std::floor((stop - start) / step + 1e-9);
        if (steps + 1 > static_cast<double>(max_points))
            throw UsageError(fmt::format("--vary {}: {:g} points; at most {} are allowed", text,
                                         steps + 1, max_points));
        for (long i = 0; i <= static_cast<long>(steps); ++i)
            axis.values.push_back(tidy(start + static_cast<double>(i) * step));
    } else {
        std::size_t from = 0;
        for (;;) {
            const auto comma = rest.find(',', from);
            const auto v = number(rest.substr(from, comma - from));
            if (!v)
                throw UsageError(fmt::format("--vary {}: '{}' is not a number ({})", text,
                                             trim(rest.substr(from, comma - from)), example));
            axis.values.push_back(*v);
            if (comma == std::string::npos)
                break;
            from = comma + 1;
        }
        if (axis.values.size() > max_points)
            throw UsageError(
                fmt::format("--vary {}: at most {} values are allowed", text, max_points));
    }
    return axis;
}

bool SweepCondition::holds(double value) const {
    if (relation == ">")
        return value > threshold;
    if (relation == ">=")
        return value >= threshold;
    if (relation == "<")
        return value < threshold;
    return value <= threshold;
}

SweepCondition parse_until(const std::string& text) {
    // The relation is the last one outside parentheses: a column may hold one,
    // as in "P(load>=40) > 0.01".
    int depth = 0;
    std::optional<std::size_t> at;
    std::size_t length = 0;
    for (std::size_t i = 0; i < text.size(); ++i) {
        const char c = text[i];
        if (c == '(')
            ++depth;
        else if (c == ')')
            --depth;
        else if (depth == 0 && (c == '<' || c == '>')) {
            at = i;
            length = i + 1 < text.size() && text[i + 1] == '=' ? 2 : 1;
            i += length - 1;
        }
    }
    const std::string usage =
        fmt::format("--until {}: expected COLUMN RELATION NUMBER with RELATION one of > >= < <=, "
                    "e.g. --until \"P(full) > 0.01\"",
                    text);
    if (!at)
        throw UsageError(usage);
    SweepCondition c;
    c.column = trim(text.substr(0, *at));
    c.relation = text.substr(*at, length);
    const auto threshold = number(text.substr(*at + length));
    if (c.column.empty() || !threshold)
        throw UsageError(usage);
    c.threshold = *threshold;
    c.text = trim(text);
    return c;
}

std::optional<double> SweepRow::cell(const std::string& column) const {
    for (const auto& [name, value] : cells)
        if (name == column)
            return value;
    return std::nullopt;
}

std::vector<std::string> columns_of(const std::vector<SweepRow>& rows) {
    std::vector<std::string> columns;
    for (const auto& row : rows)
        for (const auto& cell : row.cells)
            if (std::find(columns.begin(), columns.end(), cell.first) == columns.end())
                columns.push_back(cell.first);
    return columns;
}

SweepCrossing find_crossing(const std::string& parameter, const std::vector<SweepRow>& rows,
                            const SweepCondition& until) {
    SweepCrossing c;
    for (std::size_t i = 0; i < rows.size(); ++i) {
        const auto y = rows[i].cell(until.column);
        if (!y || !until.holds(*y))
            continue;
        c.crossed = true;
        c.at = i;
        const double x1 = rows[i].value;
        if (i == 0) {
            c.sentence = fmt::format("{} holds already at the first value, {}={:g}: no crossing "
                                     "to interpolate (start the sweep lower)",
                                     until.text, parameter, x1);
            return c;
        }
        c.before = i - 1;
        const double x0 = rows[i - 1].value;
        const double y0 = rows[i - 1].cell(until.column).value_or(NAN);
        // Linear between the two points; equal values (a > on a plateau) give x1.
        const double x = std::isfinite(y0) && *y != y0
                             ? x0 + (until.threshold - y0) * (x1 - x0) / (*y - y0)
                             : x1;
        c.interpolated = x;
        c.sentence = fmt::format("{} crossed between {}={:g} and {:g}; interpolated {} = {:.6g}",
                                 until.text, parameter, x0, x1, parameter, x);
        return c;
    }
    if (rows.empty())
        c.sentence = until.text + ": no points";
    else
        c.sentence = fmt::format("{} never held from {}={:g} to {:g}", until.text, parameter,
                                 rows.front().value, rows.back().value);
    return c;
}

SweepTable run_sweep(MPI_Comm comm, const SweepRequest& request) {
    const int rank = comm_rank(comm);
    const auto& axis = request.axis;
    if (axis.values.empty())
        throw UsageError("--vary gives no values");
    if (request.only && *request.only >= axis.values.size())
        throw UsageError(fmt::format("--only {}: the sweep has points 0 to {}", *request.only,
                                     axis.values.size() - 1));
    for (const auto& [name, value] : request.sets)
        if (name == axis.parameter)
            throw UsageError(
                fmt::format("--set {}={}: {} is the parameter --vary sweeps", name, value, name));
    const auto asks = quantile_asks(request.quantiles);

    // Refuse what can be refused before hours of solving: the parameter, the
    // --until column, the work folder.
    agree_on_local_work(comm, [&] {
        if (rank != 0)
            return;
        const model::Model m = model::read_model_file(request.model_path, request.sets);
        std::vector<std::string> names;
        for (const auto& p : m.parameters)
            names.push_back(p.name);
        if (std::find(names.begin(), names.end(), axis.parameter) == names.end())
            throw UsageError(fmt::format("--vary {}: {} has no parameter '{}' (it has: {})",
                                         axis.parameter, request.model_path, axis.parameter,
                                         joined(names)));
        if (request.until) {
            auto columns = expected_columns(m, request);
            if (std::find(columns.begin(), columns.end(), request.until->column) == columns.end()) {
                // Merged transitions are rare: not worth listing.
                columns.pop_back();
                throw UsageError(fmt::format("--until {}: no column '{}' (the columns: {})",
                                             request.until->text, request.until->column,
                                             joined(columns)));
            }
        }
        std::error_code ec;
        std::filesystem::create_directories(request.work_folder, ec);
        if (!std::filesystem::is_directory(request.work_folder))
            throw OutputError(fmt::format("cannot create the work folder {}: {}",
                                          request.work_folder, ec.message()));
    });

    SweepTable table;
    table.model_file = request.model_path;
    table.axis = axis;
    table.until = request.until;

    std::vector<std::size_t> indices;
    if (request.only)
        indices.push_back(*request.only);
    else
        for (std::size_t i = 0; i < axis.values.size(); ++i)
            indices.push_back(i);

    WorkFiles work(request.work_folder, rank == 0 && !request.keep);
    std::optional<std::string> previous_result;
    std::uint64_t previous_states = 0;
    for (const std::size_t index : indices) {
        const auto started = std::chrono::steady_clock::now();
        const double value = axis.values[index];
        const std::string where = fmt::format("{}={:g}", axis.parameter, value);
        const std::string stem = fmt::format("{}/point-{}", request.work_folder, index);
        const std::string chain_path = stem + ".h5", result_path = stem + ".result.h5";
        work.add(chain_path);
        work.add(result_path);
        model::Overrides overrides = request.sets;
        overrides.emplace_back(axis.parameter, fmt::format("{:.17g}", value));

        std::uint64_t states = 0;
        try {
            agree_on_local_work(comm, [&] {
                if (rank != 0)
                    return;
                const model::Model m = model::read_model_file(request.model_path, overrides);
                model::ExploreOptions eo;
                eo.max_states = request.max_states;
                model::ExploreReport explored;
                const io::Chain chain = model::explore(m, eo, &explored);
                if (explored.unintended_absorbing > 0)
                    std::fprintf(stderr,
                                 "longrun: warning: %s: %llu state(s) with no enabled event, "
                                 "e.g. %s\n",
                                 where.c_str(),
                                 static_cast<unsigned long long>(explored.unintended_absorbing),
                                 explored.first_unintended_absorbing.c_str());
                io::write_chain_file(chain_path, chain);
                states = chain.states;
            });
        } catch (const Error& e) {
            rethrow_at(e, where);
        }
        MPI_Bcast(&states, 1, MPI_UINT64_T, 0, comm);

        SolveRequest solve;
        solve.chain_path = chain_path;
        solve.output = result_path;
        solve.method = request.method;
        solve.tolerance = request.tolerance;
        solve.residual_tolerance = request.residual_tolerance;
        solve.preconditioner = request.preconditioner;
        solve.progress = request.solver_progress;
        // One warning for the whole sweep (see SweepRow::bound_mass), not one per point.
        if (!request.solver_progress)
            solve.truncation_threshold = 2;
        // The solve reads a warm start with the chain's own state count and refuses
        // any other; a sweep whose state space grows starts such points cold.
        const bool warm = previous_result && previous_states == states;
        if (warm) {
            // The previous point's chain, by design: other parameters, as many states.
            solve.warm_start = previous_result;
            solve.warm_start_other_chain = true;
        }
        SweepRow row;
        row.index = index;
        row.value = value;
        row.warm = warm;
        try {
            const SolveReport solved = run_solve(comm, solve);
            row.states = solved.states;
            row.method = solved.method;
            row.residual = solved.certificate.residual;
            row.start = solved.start_from.empty() ? "cold start" : solved.start_from;
            for (const auto& note : solved.truncation)
                // Zero is where a count naturally stops, as the solve judges it too.
                if ((note.upper || note.bound != 0) && note.mass > row.bound_mass) {
                    row.bound_mass = note.mass;
                    row.bound_state = fmt::format("P({} = {:g})", note.variable, note.bound);
                }

            SummaryRequest ask;
            ask.result_path = result_path;
            ask.chain_path = chain_path;
            ask.measures = request.measures;
            ask.tails = request.tails;
            ask.quantiles = request.quantiles;
            ask.rates = request.rates;
            ask.top = 0;
            ask.store = request.keep;
            ask.progress = false;
            const SummaryReport summarized = run_summary(comm, ask);
            row.cells = cells_of(summarized, asks);
            row.error_bound = summarized.summary.probability_error_bound;
        } catch (const Error& e) {
            rethrow_at(e, where);
        }
        row.seconds =
            std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();

        // Every rank is done with this point's chain and the previous result.
        MPI_Barrier(comm);
        work.drop(chain_path);
        if (previous_result)
            work.drop(*previous_result);
        previous_result = result_path;
        previous_states = states;
        table.rows.push_back(row);
        if (request.on_point)
            request.on_point(row);

        if (request.until && !row.cell(request.until->column)) {
            UsageError e(fmt::format("--until {}: no column '{}' (the columns: {})",
                                     request.until->text, request.until->column,
                                     joined(columns_of(table.rows))));
            e.mark_agreed(); // the summary is the same on every rank
            throw e;
        }
        if (request.until && !request.only &&
            request.until->holds(*row.cell(request.until->column)))
            break;
    }
    MPI_Barrier(comm); // every rank is done with the last result before it goes
    work.finish();
    MPI_Barrier(comm); // and no rank returns before the files are gone
    table.columns = columns_of(table.rows);
    if (request.until && !request.only)
        table.crossing = find_crossing(axis.parameter, table.rows, *request.until);
    return table;
}

} // namespace longrun::cli

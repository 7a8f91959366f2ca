#include "matrix_market_kind.hpp"

#include "io/error.hpp"
#include "io/matrix_market.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <charconv>
#include <cmath>
#include <fstream>
#include <optional>
#include <sstream>
#include <vector>

namespace longrun::cli {

namespace {

// Loose on purpose: this only tells the two kinds apart. The reader's own
// validation (row sums within --row-sum-tol, --renormalize) comes afterwards and
// gives its usual message.
constexpr double row_sum_slack = 1e-6;

// Per state, as if it were the source: its line's sum, diagonal and largest |entry|.
struct LineTotals {
    std::vector<double> sum, diagonal, largest;
    std::vector<bool> negative_off_diagonal;

    explicit LineTotals(std::uint64_t n)
        : sum(n, 0.0), diagonal(n, 0.0), largest(n, 0.0), negative_off_diagonal(n, false) {}

    void add(std::uint64_t line, std::uint64_t other, double v) {
        sum[line] += v;
        largest[line] = std::max(largest[line], std::abs(v));
        if (line == other)
            diagonal[line] += v;
        else if (v < 0)
            negative_off_diagonal[line] = true;
    }
};

struct FileTotals {
    LineTotals rows, columns;
    bool any_negative_diagonal = false;
};

// The row and column sums of a well-formed file; nothing when the file is not
// one (the reader then says what is wrong, with the line).
std::optional<FileTotals> file_totals(const std::string& path) {
    std::ifstream in(path);
    if (!in)
        return std::nullopt;
    std::string line;
    std::optional<FileTotals> t;
    std::uint64_t n = 0, declared = 0, seen = 0;
    while (std::getline(in, line)) {
        if (line.empty() || line[0] == '%')
            continue;
        std::istringstream fields(line);
        if (!t) {
            std::uint64_t columns = 0;
            if (!(fields >> n >> columns >> declared) || n == 0 || n != columns)
                return std::nullopt;
            t.emplace(FileTotals{LineTotals(n), LineTotals(n)});
            continue;
        }
        std::uint64_t i = 0, j = 0;
        double v = 0;
        if (!(fields >> i >> j >> v) || i < 1 || j < 1 || i > n || j > n || !std::isfinite(v))
            return std::nullopt;
        t->rows.add(i - 1, j - 1, v);
        t->columns.add(j - 1, i - 1, v);
        t->any_negative_diagonal = t->any_negative_diagonal || (i == j && v < 0);
        ++seen;
    }
    if (!t || seen != declared)
        return std::nullopt;
    return t;
}

bool generator_line(const LineTotals& t, std::uint64_t r) {
    return !t.negative_off_diagonal[r] && t.diagonal[r] <= 0 &&
           std::abs(t.sum[r]) <= row_sum_slack * std::max(1.0, t.largest[r]);
}

bool stochastic_line(const LineTotals& t, std::uint64_t r) {
    return !t.negative_off_diagonal[r] && t.diagonal[r] >= 0 &&
           std::abs(t.sum[r] - 1.0) <= row_sum_slack;
}

// The first line that fits neither kind, or n when all fit.
std::uint64_t first_misfit(const LineTotals& t, bool ctmc) {
    const std::uint64_t n = t.sum.size();
    std::uint64_t r = 0;
    while (r < n && (ctmc ? generator_line(t, r) : stochastic_line(t, r)))
        ++r;
    return r;
}

} // namespace

io::ChainKind matrix_market_kind(const std::string& path, bool transposed) {
    const auto totals = file_totals(path);
    if (!totals) {
        // Malformed: the reader names the line (the kind does not matter for that).
        (void)io::read_matrix_market(path, io::ChainKind::dtmc, {.transposed = transposed});
        throw InputError(path + ": not a Matrix Market coordinate matrix longrun can read");
    }
    const LineTotals& sources = transposed ? totals->columns : totals->rows;
    const LineTotals& other = transposed ? totals->rows : totals->columns;
    const char* line = transposed ? "column" : "row";
    // A negative diagonal says generator; then every source line must be one.
    const bool ctmc = totals->any_negative_diagonal;
    const std::uint64_t r = first_misfit(sources, ctmc);
    if (r == sources.sum.size())
        return ctmc ? io::ChainKind::ctmc : io::ChainKind::dtmc;
    std::string verdict;
    if (first_misfit(other, ctmc) == other.sum.size())
        verdict = fmt::format(
            "; every {} fits a {}, so the file holds {}", transposed ? "row" : "column",
            ctmc ? "generator" : "transition matrix",
            transposed ? fmt::format("{} with rows as source states: leave out --transposed",
                                     ctmc ? "Q" : "P")
                       : fmt::format("{} (columns as source states): give --transposed to read "
                                     "it so",
                                     ctmc ? "Q^T" : "P^T"));
    else
        verdict = fmt::format("{}; give --kind ctmc or --kind dtmc",
                              ctmc ? fmt::format(" (other {}s have a negative diagonal, as a "
                                                 "generator)",
                                                 line)
                                   : "");
    throw InputError(fmt::format(
        "{}: {} {} (state {} counting from 0): diagonal {:.9g} while the other entries sum to "
        "{:.9g}: "
        "with {}s as source states the file is neither a ctmc generator (every {} sums to 0, "
        "diagonal negative) nor a dtmc (every {} sums to 1){}",
        path, line, r + 1, r, sources.diagonal[r], sources.sum[r] - sources.diagonal[r], line, line,
        line, verdict));
}

} // namespace longrun::cli

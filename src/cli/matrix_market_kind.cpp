#include "matrix_market_kind.hpp"

#include "io/error.hpp"
#include "io/matrix_market.hpp"

#include <fmt/format.h>

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

struct RowTotals {
    std::vector<double> sum, diagonal, largest; // largest: max |entry| of the row
    std::vector<bool> negative_off_diagonal;
    bool any_negative_diagonal = false;
};

// The row sums of a well-formed file; nothing when the file is not one (the
// reader then says what is wrong, with the line).
std::optional<RowTotals> row_totals(const std::string& path) {
    std::ifstream in(path);
    if (!in)
        return std::nullopt;
    std::string line;
    bool header = false;
    std::uint64_t n = 0, declared = 0, seen = 0;
    RowTotals t;
    while (std::getline(in, line)) {
        if (line.empty() || line[0] == '%')
            continue;
        std::istringstream fields(line);
        if (!header) {
            std::uint64_t columns = 0;
            if (!(fields >> n >> columns >> declared) || n == 0 || n != columns)
                return std::nullopt;
            t.sum.assign(n, 0.0);
            t.diagonal.assign(n, 0.0);
            t.largest.assign(n, 0.0);
            t.negative_off_diagonal.assign(n, false);
            header = true;
            continue;
        }
        std::uint64_t i = 0, j = 0;
        double v = 0;
        if (!(fields >> i >> j >> v) || i < 1 || j < 1 || i > n || j > n || !std::isfinite(v))
            return std::nullopt;
        --i;
        --j;
        t.sum[i] += v;
        t.largest[i] = std::max(t.largest[i], std::abs(v));
        if (i == j) {
            t.diagonal[i] += v;
            t.any_negative_diagonal = t.any_negative_diagonal || v < 0;
        } else if (v < 0) {
            t.negative_off_diagonal[i] = true;
        }
        ++seen;
    }
    if (!header || seen != declared)
        return std::nullopt;
    return t;
}

bool generator_row(const RowTotals& t, std::uint64_t r) {
    return !t.negative_off_diagonal[r] && t.diagonal[r] <= 0 &&
           std::abs(t.sum[r]) <= row_sum_slack * std::max(1.0, t.largest[r]);
}

bool stochastic_row(const RowTotals& t, std::uint64_t r) {
    return !t.negative_off_diagonal[r] && t.diagonal[r] >= 0 &&
           std::abs(t.sum[r] - 1.0) <= row_sum_slack;
}

} // namespace

io::ChainKind matrix_market_kind(const std::string& path) {
    const auto totals = row_totals(path);
    if (!totals) {
        // Malformed: the reader names the line (the kind does not matter for that).
        (void)io::read_matrix_market(path, io::ChainKind::dtmc);
        throw InputError(path + ": not a Matrix Market coordinate matrix longrun can read");
    }
    const RowTotals& t = *totals;
    const std::uint64_t n = t.sum.size();
    // A negative diagonal says generator; then every row must be one.
    const bool ctmc = t.any_negative_diagonal;
    for (std::uint64_t r = 0; r < n; ++r) {
        if (ctmc ? generator_row(t, r) : stochastic_row(t, r))
            continue;
        throw InputError(fmt::format(
            "{}: row {} (state {} counting from 0): entries sum to {:.9g} with diagonal {:.9g}; "
            "the file is neither a ctmc generator (every row sums to 0, diagonal negative) nor a "
            "dtmc (every row sums to 1){}; give --kind ctmc or --kind dtmc",
            path, r + 1, r, t.sum[r], t.diagonal[r],
            ctmc ? " (other rows have a negative diagonal, as a generator)" : ""));
    }
    return ctmc ? io::ChainKind::ctmc : io::ChainKind::dtmc;
}

} // namespace longrun::cli

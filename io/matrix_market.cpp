#include "matrix_market.hpp"

#include "atomic_output.hpp"
#include "error.hpp"
#include "format.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cctype>
#include <cerrno>
#include <charconv>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstring>
#include <limits>
#include <memory>
#include <optional>
#include <stdexcept>
#include <string_view>
#include <sys/stat.h>
#include <system_error>
#include <unistd.h>
#include <vector>

namespace longrun::io {

namespace {

constexpr std::string_view expected_banner = "%%MatrixMarket matrix coordinate real general";

// The format's own limit is 1024 characters per line; allowing far more still
// stops a binary file without newlines from being buffered whole.
constexpr std::size_t max_line_length = std::size_t{1} << 20;
constexpr std::size_t read_chunk = std::size_t{4} << 20;

// A size line may claim anything, so the entry arrays are reserved for no more
// entries than the file has room for: the shortest entry line, "1 1 1\n", takes
// 6 bytes. Where the size is unknown (a pipe) the reservation is capped instead.
// Reserving up front saves the copies and page faults of growing 10^7 entries.
constexpr std::uint64_t shortest_entry_line = 6;
constexpr std::uint64_t unknown_size_reservation = std::uint64_t{1} << 20;

// n entries touch at most 2n states. A size line declaring more states than
// that (plus one) means isolated states, which in practice is a wrong size
// line; refusing it before the row pointer (8 bytes per state) is allocated
// keeps memory proportional to the file. Small chains are exempt, since their
// row pointer costs nothing and tests build chains of isolated states on purpose.
constexpr std::uint64_t free_state_count = std::uint64_t{1} << 20;

std::uint64_t max_states_for(std::uint64_t entries) {
    const std::uint64_t top = std::numeric_limits<std::uint64_t>::max();
    const std::uint64_t by_entries = entries > (top - 1) / 2 ? top : 2 * entries + 1;
    return std::max(by_entries, free_state_count);
}

bool is_blank(char c) {
    return c == ' ' || c == '\t' || c == '\r' || c == '\f' || c == '\v';
}

std::string_view next_token(std::string_view& rest) {
    std::size_t b = 0;
    while (b < rest.size() && is_blank(rest[b]))
        ++b;
    std::size_t e = b;
    while (e < rest.size() && !is_blank(rest[e]))
        ++e;
    const std::string_view token = rest.substr(b, e - b);
    rest.remove_prefix(e);
    return token;
}

std::string lower(std::string_view s) {
    std::string out(s);
    for (auto& c : out)
        c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
    return out;
}

// File text shown in a one-line message: bounded length, plain ASCII (bytes of
// a binary file would otherwise reach the terminal or log as broken UTF-8).
std::string clip(std::string_view s) {
    constexpr std::size_t limit = 40;
    std::string out;
    for (std::size_t i = 0; i < s.size() && i < limit; ++i) {
        const auto c = static_cast<unsigned char>(s[i]);
        out += (c < 0x20 || c >= 0x7f) ? '?' : static_cast<char>(c);
    }
    if (s.size() > limit)
        out += "...";
    return out;
}

std::string quote(std::string_view s) {
    return fmt::format("'{}'", clip(s));
}

enum class IntStatus { ok, negative, not_integer, too_large };

IntStatus parse_u64(std::string_view token, std::uint64_t& value) {
    if (token.empty())
        return IntStatus::not_integer;
    if (token.front() == '-') {
        std::uint64_t ignored = 0;
        const auto r = std::from_chars(token.data() + 1, token.data() + token.size(), ignored);
        const bool numeric = r.ptr == token.data() + token.size() &&
                             (r.ec == std::errc{} || r.ec == std::errc::result_out_of_range);
        return numeric ? IntStatus::negative : IntStatus::not_integer;
    }
    const auto r = std::from_chars(token.data(), token.data() + token.size(), value);
    if (r.ptr != token.data() + token.size())
        return IntStatus::not_integer;
    if (r.ec == std::errc::result_out_of_range)
        return IntStatus::too_large;
    return r.ec == std::errc{} ? IntStatus::ok : IntStatus::not_integer;
}

struct FileCloser {
    void operator()(std::FILE* f) const noexcept { std::fclose(f); }
};
using FilePtr = std::unique_ptr<std::FILE, FileCloser>;

// Lines as views into a large buffer: the per-line cost of iostreams is what a
// 10^7-entry file cannot afford.
class LineReader {
  public:
    // Not zero-filled: fread overwrites what is used, and a small file then touches
    // only the pages it fills instead of all 4 MiB.
    explicit LineReader(const std::string& path)
        : path_(path), buffer_(std::make_unique_for_overwrite<char[]>(read_chunk)) {
        file_.reset(std::fopen(path.c_str(), "rb"));
        if (!file_)
            throw InputError(path + ": cannot open: " + std::strerror(errno));
    }

    // False at the end of the file.
    bool next(std::string_view& line) {
        for (;;) {
            const char* start = buffer_.get() + begin_;
            const auto* nl = static_cast<const char*>(std::memchr(start, '\n', end_ - begin_));
            if (nl) {
                line = finish(start, static_cast<std::size_t>(nl - start));
                begin_ += line_length_ + 1;
                return true;
            }
            if (end_ - begin_ > max_line_length)
                throw InputError(fmt::format("{}: line {}: longer than {} bytes; this does not "
                                             "look like a Matrix Market file",
                                             path_, number_ + 1, max_line_length));
            if (eof_) {
                if (begin_ == end_)
                    return false;
                line = finish(start, end_ - begin_);
                begin_ = end_;
                return true;
            }
            refill();
        }
    }

    std::uint64_t number() const noexcept { return number_; }

    // Of a regular file; nothing for pipes and devices.
    std::optional<std::uint64_t> bytes() const {
        struct stat st {};
        if (::fstat(::fileno(file_.get()), &st) != 0 || !S_ISREG(st.st_mode))
            return std::nullopt;
        return static_cast<std::uint64_t>(st.st_size);
    }

    // The first bytes of the file, for recognising what a non-Matrix-Market file is.
    std::string_view head() {
        if (end_ == 0 && !eof_)
            refill();
        return {buffer_.get(), std::min<std::size_t>(end_, 8)};
    }

  private:
    std::string_view finish(const char* start, std::size_t length) {
        line_length_ = length;
        ++number_;
        std::string_view line(start, length);
        if (!line.empty() && line.back() == '\r')
            line.remove_suffix(1);
        // A byte-order mark is invisible in editors; refusing the banner over it
        // would be a puzzling message.
        if (number_ == 1 && line.substr(0, 3) == "\xEF\xBB\xBF")
            line.remove_prefix(3);
        return line;
    }

    void refill() {
        if (begin_ > 0) {
            std::memmove(buffer_.get(), buffer_.get() + begin_, end_ - begin_);
            end_ -= begin_;
            begin_ = 0;
        }
        const std::size_t n = std::fread(buffer_.get() + end_, 1, read_chunk - end_, file_.get());
        end_ += n;
        if (n == 0) {
            if (std::ferror(file_.get()))
                throw InputError(path_ + ": cannot read: " + std::strerror(errno));
            eof_ = true;
        }
    }

    std::string path_;
    FilePtr file_;
    std::unique_ptr<char[]> buffer_; // read_chunk bytes
    std::size_t begin_ = 0, end_ = 0, line_length_ = 0;
    bool eof_ = false;
    std::uint64_t number_ = 0;
};

struct SizeLine {
    std::uint64_t rows = 0;
    std::uint64_t entries = 0;
    std::uint64_t line = 0;
};

struct Entry {
    std::uint64_t row = 0; // 0-based
    std::uint64_t column = 0;
    double value = 0;
};

class Scanner {
  public:
    explicit Scanner(const std::string& path) : path_(path), in_(path) {}

    std::optional<std::uint64_t> file_bytes() const { return in_.bytes(); }

    [[noreturn]] void fail(std::uint64_t line, const std::string& what) const {
        throw InputError(fmt::format("{}: line {}: {}", path_, line, what));
    }

    SizeLine read_header() {
        read_banner();
        std::string_view line;
        while (in_.next(line))
            if (!skippable(line))
                return read_size_line(line);
        fail(std::max<std::uint64_t>(in_.number(), 1),
             "the file ends before the size line 'rows columns entries'");
    }

    // Calls on_entry(entry, line number) for each of the declared entries.
    template <class OnEntry>
    void read_entries(const SizeLine& size, OnEntry&& on_entry) {
        std::uint64_t seen = 0;
        std::string_view line;
        while (in_.next(line)) {
            if (skippable(line))
                continue;
            const std::uint64_t at = in_.number();
            if (seen == size.entries)
                fail(at, fmt::format("more entries than the {} declared on the size line (line {})",
                                     size.entries, size.line));
            on_entry(parse_entry(line, at, size.rows), at);
            ++seen;
        }
        if (seen < size.entries)
            fail(in_.number(), fmt::format("the file ends after {} of the {} entries declared on "
                                           "the size line (line {})",
                                           seen, size.entries, size.line));
    }

  private:
    static bool skippable(std::string_view line) {
        std::size_t i = 0;
        while (i < line.size() && is_blank(line[i]))
            ++i;
        return i == line.size() || line[i] == '%';
    }

    void read_banner() {
        const std::string_view head = in_.head();
        std::string_view line;
        if (!in_.next(line))
            fail(1,
                 fmt::format("empty file: missing the Matrix Market banner '{}'", expected_banner));
        std::string_view rest = line;
        const std::string_view first = next_token(rest);
        if (lower(first) != "%%matrixmarket") {
            std::string hint;
            if (head.substr(0, 2) == "\x1f\x8b")
                hint = " (the file looks gzip-compressed: decompress it first)";
            else if (head.substr(0, 4) == "\x89HDF")
                hint = " (this is an HDF5 file, not a Matrix Market file)";
            fail(1, fmt::format("missing the Matrix Market banner: the first line should be '{}'{}",
                                expected_banner, hint));
        }
        const std::string_view words[4] = {next_token(rest), next_token(rest), next_token(rest),
                                           next_token(rest)};
        if (words[3].empty())
            fail(1,
                 fmt::format("incomplete banner {}: expected '{}'", quote(line), expected_banner));
        const std::string object = lower(words[0]);
        const std::string format = lower(words[1]);
        const std::string field = lower(words[2]);
        const std::string symmetry = lower(words[3]);
        if (object != "matrix")
            fail(1, fmt::format("banner object {} is not supported: longrun reads a 'matrix'",
                                quote(words[0])));
        if (format == "array")
            fail(1, "the dense 'array' format is not supported: longrun reads the sparse "
                    "'coordinate' format");
        if (format != "coordinate")
            fail(1, fmt::format("unknown format {} in the banner: expected 'coordinate'",
                                quote(words[1])));
        if (field == "pattern")
            fail(1, "field 'pattern' carries no values, but longrun needs real weights "
                    "(field 'real' or 'integer')");
        if (field == "complex")
            fail(1, "field 'complex' is not supported: longrun needs real weights "
                    "(field 'real' or 'integer')");
        if (field != "real" && field != "integer")
            fail(1, fmt::format("unknown field {} in the banner: longrun needs real weights "
                                "(field 'real' or 'integer')",
                                quote(words[2])));
        if (symmetry == "symmetric" || symmetry == "skew-symmetric" || symmetry == "hermitian")
            fail(1, fmt::format("symmetry {} is not supported: a transition matrix is general "
                                "(list every entry and declare 'general')",
                                quote(words[3])));
        if (symmetry != "general")
            fail(1, fmt::format("unknown symmetry {} in the banner: expected 'general'",
                                quote(words[3])));
        if (const auto extra = next_token(rest); !extra.empty())
            fail(1, fmt::format("unexpected text {} after the banner", quote(extra)));
    }

    std::uint64_t size_number(std::string_view token, const char* what, std::uint64_t at,
                              std::string_view line) const {
        if (token.empty())
            fail(at, fmt::format("the size line should be 'rows columns entries'; found {}",
                                 quote(line)));
        std::uint64_t value = 0;
        switch (parse_u64(token, value)) {
        case IntStatus::ok:
            return value;
        case IntStatus::negative:
            fail(at, fmt::format("negative number of {} ({})", what, clip(token)));
        case IntStatus::too_large:
            fail(at, fmt::format("number of {} {} is too large", what, quote(token)));
        case IntStatus::not_integer:
            break;
        }
        fail(at, fmt::format("number of {} {} is not a non-negative integer", what, quote(token)));
    }

    SizeLine read_size_line(std::string_view line) {
        const std::uint64_t at = in_.number();
        std::string_view rest = line;
        const std::string_view tokens[3] = {next_token(rest), next_token(rest), next_token(rest)};
        SizeLine size;
        size.line = at;
        size.rows = size_number(tokens[0], "rows", at, line);
        const std::uint64_t columns = size_number(tokens[1], "columns", at, line);
        size.entries = size_number(tokens[2], "entries", at, line);
        if (const auto extra = next_token(rest); !extra.empty())
            fail(at, fmt::format("unexpected text {} after the size line (a coordinate size line "
                                 "is 'rows columns entries')",
                                 quote(extra)));
        if (size.rows == 0 || columns == 0)
            fail(at, fmt::format("the matrix is {} x {}: a chain needs at least one state",
                                 size.rows, columns));
        if (size.rows != columns)
            fail(at, fmt::format("the matrix is {} x {}, but a transition matrix is square "
                                 "(states x states)",
                                 size.rows, columns));
        if (size.entries / size.rows > size.rows ||
            (size.entries / size.rows == size.rows && size.entries % size.rows != 0))
            fail(at, fmt::format("{} entries declared, more than a {} x {} matrix can hold",
                                 size.entries, size.rows, size.rows));
        if (size.rows > max_states_for(size.entries))
            fail(at, fmt::format("{} states declared but only {} {}, so most states would "
                                 "have no transition at all; longrun's Matrix Market reader "
                                 "accepts at most max(2 x entries + 1, {}) states",
                                 size.rows, size.entries, size.entries == 1 ? "entry" : "entries",
                                 free_state_count));
        return size;
    }

    std::uint64_t index(std::string_view token, const char* what, std::uint64_t at,
                        std::uint64_t n) const {
        std::uint64_t value = 0;
        switch (parse_u64(token, value)) {
        case IntStatus::ok:
            if (value >= 1 && value <= n)
                return value - 1;
            [[fallthrough]];
        case IntStatus::negative:
        case IntStatus::too_large:
            fail(at, fmt::format("{} index {} is out of range: indices are 1-based, from 1 to {}",
                                 what, clip(token), n));
        case IntStatus::not_integer:
            break;
        }
        fail(at, fmt::format("{} index {} is not an integer", what, quote(token)));
    }

    Entry parse_entry(std::string_view line, std::uint64_t at, std::uint64_t n) const {
        std::string_view rest = line;
        const std::string_view tokens[3] = {next_token(rest), next_token(rest), next_token(rest)};
        if (tokens[2].empty())
            fail(at, fmt::format("expected 'row column value'; found {}", quote(line)));
        Entry e;
        e.row = index(tokens[0], "row", at, n);
        e.column = index(tokens[1], "column", at, n);
        std::string_view v = tokens[2];
        // from_chars refuses an explicit plus sign, which other writers do emit.
        if (v.size() > 1 && v.front() == '+' && v[1] != '-' && v[1] != '+')
            v.remove_prefix(1);
        const auto r = std::from_chars(v.data(), v.data() + v.size(), e.value);
        if (r.ptr != v.data() + v.size() ||
            (r.ec != std::errc{} && r.ec != std::errc::result_out_of_range))
            fail(at, fmt::format("value {} is not a number", quote(tokens[2])));
        if (r.ec == std::errc::result_out_of_range)
            fail(at, fmt::format("value {} is out of the range of a double", quote(tokens[2])));
        if (!std::isfinite(e.value))
            fail(at, fmt::format("value {} is not finite: weights must be finite numbers",
                                 quote(tokens[2])));
        if (const auto extra = next_token(rest); !extra.empty())
            fail(at, fmt::format("unexpected text {} after the value (an entry line is "
                                 "'row column value')",
                                 quote(extra)));
        return e;
    }

    std::string path_;
    LineReader in_;
};

// Only on the error path: a second pass finds the two lines of a duplicate, so
// that the common case keeps no line number per entry.
[[noreturn]] void report_duplicate(const std::string& path, std::uint64_t row,
                                   std::uint64_t column) {
    Scanner scan(path);
    const SizeLine size = scan.read_header();
    std::optional<std::uint64_t> first;
    scan.read_entries(size, [&](const Entry& e, std::uint64_t at) {
        if (e.row != row || e.column != column)
            return;
        if (!first) {
            first = at;
            return;
        }
        scan.fail(at, fmt::format("duplicate entry ({}, {}): line {} already gives it (list each "
                                  "transition once)",
                                  row + 1, column + 1, *first));
    });
    throw InputError(fmt::format("{}: duplicate entry ({}, {}) (the file changed while it was "
                                 "being read)",
                                 path, row + 1, column + 1));
}

// The words for the file's two indices as read: which one names the source state.
struct Orientation {
    const char* sources;
    const char* other;
};

Orientation orientation_of(const MatrixMarketReading& reading) {
    return reading.transposed ? Orientation{"column", "row"} : Orientation{"row", "column"};
}

struct GivenDiagonal {
    std::uint64_t state = 0;
    double value = 0;
};

double weight_out_of(const Chain& chain, std::uint64_t state) {
    double total = 0;
    for (auto k = chain.offsets[state]; k < chain.offsets[state + 1]; ++k)
        total += chain.weights[k];
    return total;
}

// Each state's sum as it would be had the file been read the other way round.
// Only on the error path, so that a good file costs no second array.
std::vector<double> weight_into(const Chain& chain) {
    std::vector<double> total(chain.states, 0.0);
    for (std::size_t k = 0; k < chain.targets.size(); ++k)
        total[chain.targets[k]] += chain.weights[k];
    return total;
}

bool balances(double diagonal, double rates, double tolerance) {
    return std::abs(diagonal + rates) <= tolerance * std::max(std::abs(diagonal), rates);
}

// The diagonal a file gives is the only thing that shows which index of a
// generator is the source: read the wrong way round, Q^T is a valid set of rates
// of another chain, and solving it gives the mirror-image answer.
void check_generator_diagonal(const std::string& path, const Chain& chain,
                              const std::vector<GivenDiagonal>& diagonals,
                              const MatrixMarketReading& reading) {
    const double tolerance = reading.row_sum_tolerance;
    const auto bad = std::find_if(diagonals.begin(), diagonals.end(), [&](const GivenDiagonal& d) {
        return !balances(d.value, weight_out_of(chain, d.state), tolerance);
    });
    if (bad == diagonals.end())
        return;
    const std::vector<double> into = weight_into(chain);
    const bool other_way_fits =
        std::all_of(diagonals.begin(), diagonals.end(), [&](const GivenDiagonal& d) {
            return balances(d.value, into[d.state], tolerance);
        });
    const Orientation o = orientation_of(reading);
    std::string verdict;
    if (!other_way_fits)
        verdict = fmt::format("; the {}s do not balance their diagonals either, so the file is "
                              "not a generator read either way round",
                              o.other);
    else if (!reading.transposed)
        verdict = "; every column does balance its diagonal, so the file holds Q^T (columns as "
                  "source states): give --transposed to read it so";
    else
        verdict = "; every row does balance its diagonal, so the file holds Q with rows as source "
                  "states: leave out --transposed";
    throw InputError(fmt::format(
        "{}: {} {} (state {} counting from 0): diagonal {}, but the {}'s other entries sum to "
        "{}; a generator's diagonal is minus that sum (relative tolerance {}, --row-sum-tol){}",
        path, o.sources, bad->state + 1, bad->state, fmt_double(bad->value), o.sources,
        fmt_double(weight_out_of(chain, bad->state)), fmt_double(tolerance), verdict));
}

// A transition matrix stored as P^T has rows that do not sum to 1, which the
// validator refuses without saying why (or, with --renormalize, rescales into
// another chain). When every column sums to 1 instead, the file says which way
// round it is; otherwise the rows are the validator's to judge.
void check_stochastic_orientation(const std::string& path, const Chain& chain,
                                  const MatrixMarketReading& reading) {
    const double tolerance = reading.row_sum_tolerance;
    std::uint64_t bad = 0;
    while (bad < chain.states && std::abs(weight_out_of(chain, bad) - 1.0) <= tolerance)
        ++bad;
    if (bad == chain.states)
        return;
    const std::vector<double> into = weight_into(chain);
    if (!std::all_of(into.begin(), into.end(),
                     [&](double total) { return std::abs(total - 1.0) <= tolerance; }))
        return;
    const Orientation o = orientation_of(reading);
    throw InputError(fmt::format(
        "{}: {} {} (state {} counting from 0): probabilities sum to {}, not 1, while {} {} sums "
        "to {} and every {} sums to 1 (tolerance {}, --row-sum-tol), so the file holds {}",
        path, o.sources, bad + 1, bad, fmt_double(weight_out_of(chain, bad)), o.other, bad + 1,
        fmt_double(into[bad]), o.other, fmt_double(tolerance),
        reading.transposed ? "P with rows as source states: leave out --transposed"
                           : "P^T (columns as source states): give --transposed to read it so"));
}

} // namespace

Chain read_matrix_market(const std::string& path, ChainKind kind,
                         const MatrixMarketReading& reading) {
    Scanner scan(path);
    const SizeLine size = scan.read_header();
    const bool ctmc = kind == ChainKind::ctmc;

    std::vector<std::uint64_t> sources, targets;
    std::vector<double> weights;
    std::vector<GivenDiagonal> diagonals; // ctmc
    const auto room =
        scan.file_bytes() ? *scan.file_bytes() / shortest_entry_line + 1 : unknown_size_reservation;
    const auto reserve = std::min(size.entries, room);
    sources.reserve(reserve);
    targets.reserve(reserve);
    weights.reserve(reserve);

    scan.read_entries(size, [&](const Entry& e, std::uint64_t at) {
        if (ctmc && e.row == e.column) {
            if (e.value > 0)
                scan.fail(at, fmt::format("positive diagonal in a ctmc generator: entry ({}, {}) "
                                          "is {}, but a generator's diagonal is minus the state's "
                                          "total rate, so it must be <= 0",
                                          e.row + 1, e.column + 1, fmt_double(e.value)));
            diagonals.push_back({e.row, e.value});
            return;
        }
        const auto source = reading.transposed ? e.column : e.row;
        const auto target = reading.transposed ? e.row : e.column;
        if (e.value < 0)
            scan.fail(at, ctmc ? fmt::format("negative rate {} from state {} to state {}: the "
                                             "off-diagonal entries of a ctmc generator are rates "
                                             ">= 0",
                                             fmt_double(e.value), source + 1, target + 1)
                               : fmt::format("negative probability {} from state {} to state {}: "
                                             "dtmc entries are probabilities >= 0 (is this a ctmc "
                                             "generator?)",
                                             fmt_double(e.value), source + 1, target + 1));
        sources.push_back(source);
        targets.push_back(target);
        weights.push_back(e.value);
    });

    std::sort(diagonals.begin(), diagonals.end(),
              [](const GivenDiagonal& a, const GivenDiagonal& b) { return a.state < b.state; });
    if (const auto d = std::adjacent_find(
            diagonals.begin(), diagonals.end(),
            [](const GivenDiagonal& a, const GivenDiagonal& b) { return a.state == b.state; });
        d != diagonals.end())
        report_duplicate(path, d->state, d->state);

    Chain chain = chain_from_triples(kind, size.rows, std::move(sources), std::move(targets),
                                     std::move(weights));
    for (std::uint64_t r = 0; r < chain.states; ++r) {
        const auto b = chain.targets.begin() + static_cast<std::ptrdiff_t>(chain.offsets[r]);
        const auto e = chain.targets.begin() + static_cast<std::ptrdiff_t>(chain.offsets[r + 1]);
        if (const auto d = std::adjacent_find(b, e); d != e) {
            if (reading.transposed)
                report_duplicate(path, *d, r);
            report_duplicate(path, r, *d);
        }
    }
    if (ctmc)
        check_generator_diagonal(path, chain, diagonals, reading);
    else
        check_stochastic_orientation(path, chain, reading);
    return chain;
}

namespace {

class BufferedWriter {
  public:
    BufferedWriter(std::string final_path, const std::string& temporary)
        : path_(std::move(final_path)) {
        file_.reset(std::fopen(temporary.c_str(), "wb"));
        if (!file_)
            throw OutputError(path_ + ": cannot create " + temporary + ": " + std::strerror(errno));
    }

    fmt::memory_buffer& buffer() { return buffer_; }

    void flush_if_full() {
        if (buffer_.size() >= flush_size)
            flush();
    }

    void close() {
        flush();
        if (std::fflush(file_.get()) != 0)
            fail();
        // Durable before the rename, so that a crash cannot leave an empty file
        // under the final name.
        if (::fsync(::fileno(file_.get())) != 0 && errno != EINVAL)
            fail();
        if (std::fclose(file_.release()) != 0)
            fail();
    }

  private:
    static constexpr std::size_t flush_size = std::size_t{4} << 20;

    void flush() {
        if (buffer_.size() != 0 &&
            std::fwrite(buffer_.data(), 1, buffer_.size(), file_.get()) != buffer_.size())
            fail();
        buffer_.clear();
    }

    [[noreturn]] void fail() const {
        throw OutputError(path_ + ": cannot write: " + std::strerror(errno));
    }

    std::string path_;
    FilePtr file_;
    fmt::memory_buffer buffer_;
};

} // namespace

void write_matrix_market(const std::string& path, const Chain& chain) {
    const bool ctmc = chain.kind == ChainKind::ctmc;
    if (chain.rows != RowRange{0, chain.states} || chain.offsets.size() != chain.states + 1 ||
        chain.offsets.back() != chain.targets.size() ||
        chain.weights.size() != chain.targets.size())
        throw std::invalid_argument(path + ": write_matrix_market needs a whole, consistent chain");

    // Self-loops of a ctmc do nothing and would collide with the generator's
    // diagonal, so they are left out.
    std::uint64_t entries = 0;
    for (std::uint64_t r = 0; r < chain.states; ++r) {
        if (!ctmc) {
            entries += chain.offsets[r + 1] - chain.offsets[r];
            continue;
        }
        std::uint64_t rates = 0;
        for (auto k = chain.offsets[r]; k < chain.offsets[r + 1]; ++k)
            rates += chain.targets[k] != r;
        entries += rates + (rates > 0);
    }

    AtomicOutput out(path);
    BufferedWriter w(path, out.temporary());
    auto it = fmt::appender(w.buffer());
    fmt::format_to(it, "{}\n", expected_banner);
    if (ctmc)
        fmt::format_to(it, "% written by longrun: ctmc generator Q, row = source state, "
                           "diagonal = minus the state's total rate\n");
    else
        fmt::format_to(it, "% written by longrun: dtmc transition matrix P, row = source state\n");
    fmt::format_to(it, "{} {} {}\n", chain.states, chain.states, entries);

    // "{}" is the shortest text that reads back to the same double: exact
    // round trips at a fraction of the size of 17 significant digits.
    for (std::uint64_t r = 0; r < chain.states; ++r) {
        const auto begin = chain.offsets[r], end = chain.offsets[r + 1];
        if (!ctmc) {
            for (auto k = begin; k < end; ++k)
                fmt::format_to(it, "{} {} {}\n", r + 1, chain.targets[k] + 1, chain.weights[k]);
            w.flush_if_full();
            continue;
        }
        double total = 0;
        bool any = false;
        for (auto k = begin; k < end; ++k)
            if (chain.targets[k] != r) {
                total += chain.weights[k];
                any = true;
            }
        // The reader refuses a non-finite value, so such a file could not be read back.
        if (!std::isfinite(total))
            throw OutputError(fmt::format("{}: the total rate of state {} is {}, so the "
                                          "generator's diagonal cannot be written",
                                          path, r + 1, fmt_double(total)));
        // -0.0 would print as "-0"; a zero total is written as a plain 0.
        const double diagonal = total == 0 ? 0.0 : -total;
        bool diagonal_written = !any;
        for (auto k = begin; k < end; ++k) {
            const auto t = chain.targets[k];
            if (t == r)
                continue;
            if (!diagonal_written && t > r) {
                fmt::format_to(it, "{} {} {}\n", r + 1, r + 1, diagonal);
                diagonal_written = true;
            }
            fmt::format_to(it, "{} {} {}\n", r + 1, t + 1, chain.weights[k]);
        }
        if (!diagonal_written)
            fmt::format_to(it, "{} {} {}\n", r + 1, r + 1, diagonal);
        w.flush_if_full();
    }
    w.close();
    out.commit();
}

} // namespace longrun::io

// Matrix Market reading and writing: accepted files, exact round trips, one
// rejection per malformed construct, and a published matrix with a known fault.
#include "io/chain_file.hpp"
#include "io/error.hpp"
#include "io/matrix_market.hpp"

#include <gtest/gtest.h>
#include <unistd.h>

#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <limits>
#include <random>
#include <sstream>
#include <string>
#include <vector>

namespace fs = std::filesystem;
using longrun::InputError;
using longrun::OutputError;
using longrun::io::Chain;
using longrun::io::chain_from_triples;
using longrun::io::ChainKind;
using longrun::io::read_matrix_market;
using longrun::io::write_matrix_market;

namespace {

const std::string banner = "%%MatrixMarket matrix coordinate real general\n";

class TempDir {
  public:
    TempDir() {
        std::random_device rd;
        path_ = fs::temp_directory_path() /
                ("longrun-mm-test-" + std::to_string(::getpid()) + "-" + std::to_string(rd()));
        fs::create_directories(path_);
    }
    ~TempDir() {
        std::error_code ignored;
        fs::remove_all(path_, ignored);
    }
    const fs::path& path() const { return path_; }

    std::string write(const std::string& name, const std::string& content) const {
        const auto p = (path_ / name).string();
        std::ofstream(p, std::ios::binary) << content;
        return p;
    }

  private:
    fs::path path_;
};

std::string read_text(const std::string& path) {
    std::ifstream in(path, std::ios::binary);
    std::stringstream s;
    s << in.rdbuf();
    return s.str();
}

void expect_same_chain(const Chain& a, const Chain& b) {
    EXPECT_EQ(a.kind, b.kind);
    EXPECT_EQ(a.states, b.states);
    EXPECT_EQ(a.transitions, b.transitions);
    EXPECT_EQ(a.rows, b.rows);
    EXPECT_EQ(a.offsets, b.offsets);
    EXPECT_EQ(a.targets, b.targets);
    // operator== on doubles: bit-exact except for the sign of zero, which
    // the comparison below catches too.
    ASSERT_EQ(a.weights.size(), b.weights.size());
    for (std::size_t k = 0; k < a.weights.size(); ++k) {
        EXPECT_EQ(a.weights[k], b.weights[k]) << "entry " << k;
        EXPECT_EQ(std::signbit(a.weights[k]), std::signbit(b.weights[k])) << "entry " << k;
    }
}

class MatrixMarketTest : public testing::Test {
  protected:
    TempDir dir;
};

TEST_F(MatrixMarketTest, ReadsRowsAsZeroBasedSourceStates) {
    const auto path = dir.write("p.mtx", banner + "% a comment\n"
                                                  "3 3 5\n"
                                                  "3 2 0.75\n"
                                                  "1 2 0.5\n"
                                                  "2 3 1\n"
                                                  "1 1 0.5\n"
                                                  "3 1 0.25\n");
    const Chain c = read_matrix_market(path, ChainKind::dtmc);
    EXPECT_EQ(c.kind, ChainKind::dtmc);
    EXPECT_EQ(c.states, 3u);
    EXPECT_EQ(c.transitions, 5u);
    EXPECT_EQ(c.rows, (longrun::RowRange{0, 3}));
    EXPECT_EQ(c.offsets, (std::vector<std::uint64_t>{0, 2, 3, 5}));
    EXPECT_EQ(c.targets, (std::vector<std::uint64_t>{0, 1, 2, 0, 1}));
    EXPECT_EQ(c.weights, (std::vector<double>{0.5, 0.5, 1, 0.25, 0.75}));
}

TEST_F(MatrixMarketTest, DtmcKeepsSelfLoops) {
    const auto path = dir.write("p.mtx", banner + "2 2 3\n1 1 0.25\n1 2 0.75\n2 1 1\n");
    const Chain c = read_matrix_market(path, ChainKind::dtmc);
    EXPECT_EQ(c.transitions, 3u);
    EXPECT_EQ(c.targets, (std::vector<std::uint64_t>{0, 1, 0}));
    EXPECT_EQ(c.weights, (std::vector<double>{0.25, 0.75, 1}));
}

TEST_F(MatrixMarketTest, AcceptsIntegerFieldMixedCaseBannerAndCrlfLines) {
    const auto path = dir.write("q.mtx", "%%matrixmarket MATRIX Coordinate Integer GENERAL\r\n"
                                         "2 2 2\r\n"
                                         "1 2 3\r\n"
                                         "2 1 4\r\n");
    const Chain c = read_matrix_market(path, ChainKind::ctmc);
    EXPECT_EQ(c.targets, (std::vector<std::uint64_t>{1, 0}));
    EXPECT_EQ(c.weights, (std::vector<double>{3, 4}));
}

TEST_F(MatrixMarketTest, AcceptsCommentsBlankLinesTabsAndNoFinalNewline) {
    const auto path = dir.write("q.mtx", banner + "%\n"
                                                  "\n"
                                                  "% size follows\n"
                                                  "  2\t2 2  \n"
                                                  "\n"
                                                  "1 2 +0.5E+01\n"
                                                  "   % between entries\n"
                                                  "\t2\t1\t1e-3");
    const Chain c = read_matrix_market(path, ChainKind::ctmc);
    EXPECT_EQ(c.weights, (std::vector<double>{5, 1e-3}));
}

TEST_F(MatrixMarketTest, CtmcDropsTheGeneratorDiagonal) {
    // Q = [[-3, 1, 2], [0.5, -0.5, 0], [0, 0, 0]]: state 3 absorbing, its zero
    // diagonal written out.
    const auto path = dir.write("q.mtx", banner + "3 3 6\n"
                                                  "1 1 -3\n"
                                                  "1 2 1\n"
                                                  "1 3 2\n"
                                                  "2 2 -0.5\n"
                                                  "2 1 0.5\n"
                                                  "3 3 0\n");
    const Chain c = read_matrix_market(path, ChainKind::ctmc);
    EXPECT_EQ(c.kind, ChainKind::ctmc);
    EXPECT_EQ(c.states, 3u);
    EXPECT_EQ(c.transitions, 3u);
    EXPECT_EQ(c.offsets, (std::vector<std::uint64_t>{0, 2, 3, 3}));
    EXPECT_EQ(c.targets, (std::vector<std::uint64_t>{1, 2, 0}));
    EXPECT_EQ(c.weights, (std::vector<double>{1, 2, 0.5}));
}

TEST_F(MatrixMarketTest, CtmcAcceptsRatesWithoutDiagonal) {
    const auto path = dir.write("q.mtx", banner + "2 2 2\n1 2 1.5\n2 1 2.5\n");
    const Chain c = read_matrix_market(path, ChainKind::ctmc);
    EXPECT_EQ(c.transitions, 2u);
    EXPECT_EQ(c.weights, (std::vector<double>{1.5, 2.5}));
}

// Values chosen to need all 17 significant digits, or to sit at the ends of
// the double range (smallest subnormal, near the largest finite value).
const std::vector<double> awkward = {
    0.1, 1.0 / 3, 2.0 / 3, 1e-300, 5e-324, 1e300, 123456789.123456789, std::nextafter(1.0, 2.0),
    0.3, 7};

TEST_F(MatrixMarketTest, CtmcRoundTripIsExact) {
    std::vector<std::uint64_t> s = {0, 0, 1, 1, 2, 3, 3, 4, 4, 4};
    std::vector<std::uint64_t> t = {1, 4, 0, 2, 3, 0, 4, 0, 1, 3};
    const Chain original = chain_from_triples(ChainKind::ctmc, 6, s, t, awkward);
    const auto first = (dir.path() / "first.mtx").string();
    const auto second = (dir.path() / "second.mtx").string();
    write_matrix_market(first, original);
    const Chain back = read_matrix_market(first, ChainKind::ctmc);
    expect_same_chain(original, back);
    write_matrix_market(second, back);
    EXPECT_EQ(read_text(first), read_text(second));
}

TEST_F(MatrixMarketTest, DtmcRoundTripIsExact) {
    std::vector<std::uint64_t> s = {0, 0, 1, 1, 2, 3, 3, 4, 4, 4};
    std::vector<std::uint64_t> t = {0, 4, 0, 1, 3, 3, 4, 0, 1, 4};
    std::vector<double> w = awkward;
    w[9] = 0; // an explicit zero survives as an entry
    const Chain original = chain_from_triples(ChainKind::dtmc, 5, s, t, w);
    const auto first = (dir.path() / "first.mtx").string();
    const auto second = (dir.path() / "second.mtx").string();
    write_matrix_market(first, original);
    const Chain back = read_matrix_market(first, ChainKind::dtmc);
    expect_same_chain(original, back);
    write_matrix_market(second, back);
    EXPECT_EQ(read_text(first), read_text(second));
}

TEST_F(MatrixMarketTest, LargeRoundTripCrossesBufferBoundaries) {
    // About 10 MB of text: more than two 4 MiB read chunks and write flushes.
    const std::uint64_t n = 100000;
    std::mt19937_64 rng(12345);
    std::uniform_real_distribution<double> rate(0.0, 10.0);
    std::vector<std::uint64_t> s, t;
    std::vector<double> w;
    for (std::uint64_t i = 0; i < n; ++i)
        for (std::uint64_t step : {1ull, 7ull, 1000ull}) {
            s.push_back(i);
            t.push_back((i + step) % n);
            w.push_back(rate(rng));
        }
    for (ChainKind kind : {ChainKind::ctmc, ChainKind::dtmc}) {
        const Chain original = chain_from_triples(kind, n, s, t, w);
        const auto path = (dir.path() / "large.mtx").string();
        write_matrix_market(path, original);
        EXPECT_GT(fs::file_size(path), std::uintmax_t{8} << 20);
        expect_same_chain(original, read_matrix_market(path, kind));
    }
}

TEST_F(MatrixMarketTest, CtmcIsWrittenAsTheGenerator) {
    const Chain c = chain_from_triples(ChainKind::ctmc, 3, {0, 0, 1}, {1, 2, 0}, {2, 0.5, 1});
    const auto path = (dir.path() / "q.mtx").string();
    write_matrix_market(path, c);
    std::istringstream text(read_text(path));
    std::string line;
    std::vector<std::string> lines;
    while (std::getline(text, line))
        lines.push_back(line);
    ASSERT_EQ(lines.size(), 8u);
    EXPECT_EQ(lines[0], "%%MatrixMarket matrix coordinate real general");
    EXPECT_EQ(lines[1].rfind("% written by longrun", 0), 0u) << lines[1];
    EXPECT_NE(lines[1].find("ctmc"), std::string::npos) << lines[1];
    // State 3 has no rates, so no diagonal entry: the file is Q exactly.
    EXPECT_EQ(lines[2], "3 3 5");
    EXPECT_EQ(lines[3], "1 1 -2.5");
    EXPECT_EQ(lines[4], "1 2 2");
    EXPECT_EQ(lines[5], "1 3 0.5");
    EXPECT_EQ(lines[6], "2 1 1");
    EXPECT_EQ(lines[7], "2 2 -1");
}

TEST_F(MatrixMarketTest, DtmcIsWrittenAsIs) {
    const Chain c = chain_from_triples(ChainKind::dtmc, 2, {0, 1, 1}, {1, 0, 1}, {1, 0.5, 0.5});
    const auto path = (dir.path() / "p.mtx").string();
    write_matrix_market(path, c);
    const std::string text = read_text(path);
    const auto size_line = text.find("\n2 2 3\n");
    ASSERT_NE(size_line, std::string::npos) << text;
    EXPECT_NE(text.find("dtmc"), std::string::npos);
    EXPECT_EQ(text.substr(size_line + 7), "1 2 1\n2 1 0.5\n2 2 0.5\n");
}

TEST_F(MatrixMarketTest, CtmcSelfLoopsAreLeftOutOfTheGenerator) {
    const Chain c = chain_from_triples(ChainKind::ctmc, 2, {0, 0, 1}, {0, 1, 0}, {9, 2, 1});
    const auto path = (dir.path() / "q.mtx").string();
    write_matrix_market(path, c);
    const std::string text = read_text(path);
    EXPECT_NE(text.find("\n1 1 -2\n"), std::string::npos) << text;
    EXPECT_EQ(text.find(" 9\n"), std::string::npos) << text;
    const Chain back = read_matrix_market(path, ChainKind::ctmc);
    EXPECT_EQ(back.transitions, 2u);
    EXPECT_EQ(back.targets, (std::vector<std::uint64_t>{1, 0}));
}

TEST_F(MatrixMarketTest, CtmcWhoseTotalRateOverflowsIsNotWritten) {
    const double big = std::numeric_limits<double>::max();
    const Chain c = chain_from_triples(ChainKind::ctmc, 3, {1, 1}, {0, 2}, {big, big});
    const auto path = (dir.path() / "q.mtx").string();
    try {
        write_matrix_market(path, c);
        ADD_FAILURE() << "no error";
    } catch (const OutputError& e) {
        EXPECT_NE(std::string(e.what()).find("state 2"), std::string::npos) << e.what();
    }
    // Neither the final file nor the half-written temporary one remains.
    EXPECT_TRUE(fs::is_empty(dir.path()));
}

TEST_F(MatrixMarketTest, WritingLeavesOnlyTheFinishedFile) {
    const Chain c = chain_from_triples(ChainKind::dtmc, 1, {0}, {0}, {1});
    write_matrix_market((dir.path() / "p.mtx").string(), c);
    std::vector<std::string> names;
    for (const auto& e : fs::directory_iterator(dir.path()))
        names.push_back(e.path().filename().string());
    EXPECT_EQ(names, std::vector<std::string>{"p.mtx"});
}

TEST_F(MatrixMarketTest, WritingIntoAMissingFolderThrowsOutputError) {
    const Chain c = chain_from_triples(ChainKind::dtmc, 1, {0}, {0}, {1});
    const auto path = (dir.path() / "no-such-folder" / "p.mtx").string();
    try {
        write_matrix_market(path, c);
        ADD_FAILURE() << "no error";
    } catch (const OutputError& e) {
        EXPECT_NE(std::string(e.what()).find(path), std::string::npos) << e.what();
    }
    EXPECT_FALSE(fs::exists(path));
}

// --- which index is the source ---------------------------------------------

using longrun::io::MatrixMarketReading;

// Q of a birth-death chain on 0..2 (births at rate 1, deaths at rate 2):
//   [[-1, 1, 0], [2, -3, 1], [0, 2, -2]]
// stored as Q^T: file row i holds column i of Q, so row 1 reads diagonal -1
// with 2 beside it, and every column sums to 0.
const std::string generator_transposed = banner + "3 3 7\n"
                                                  "1 1 -1\n"
                                                  "1 2 2\n"
                                                  "2 1 1\n"
                                                  "2 2 -3\n"
                                                  "2 3 2\n"
                                                  "3 2 1\n"
                                                  "3 3 -2\n";

// The message from reading `path` as `kind`; empty when the file is accepted.
std::string refusal(const std::string& path, ChainKind kind, MatrixMarketReading reading = {}) {
    try {
        (void)read_matrix_market(path, kind, reading);
    } catch (const InputError& e) {
        const std::string message = e.what();
        EXPECT_EQ(message.find('\n'), std::string::npos) << message;
        EXPECT_EQ(message.rfind(path + ": ", 0), 0u) << message;
        return message;
    }
    ADD_FAILURE() << path << " was accepted";
    return {};
}

void expect_mentions(const std::string& message, const std::vector<std::string>& words) {
    for (const auto& w : words)
        EXPECT_NE(message.find(w), std::string::npos) << "'" << w << "' in " << message;
}

TEST_F(MatrixMarketTest, TransposedGeneratorIsRefusedNamingRowSumsAndOption) {
    const auto path = dir.write("qt.mtx", generator_transposed);
    expect_mentions(refusal(path, ChainKind::ctmc),
                    {"row 1 ", "diagonal -1", "sum to 2", "Q^T", "--transposed"});
}

TEST_F(MatrixMarketTest, TransposedGeneratorReadWithTransposedIsQ) {
    const auto path = dir.write("qt.mtx", generator_transposed);
    const Chain c = read_matrix_market(path, ChainKind::ctmc, {.transposed = true});
    EXPECT_EQ(c.offsets, (std::vector<std::uint64_t>{0, 1, 3, 4}));
    EXPECT_EQ(c.targets, (std::vector<std::uint64_t>{1, 0, 2, 1}));
    EXPECT_EQ(c.weights, (std::vector<double>{1, 2, 1, 2}));
}

TEST_F(MatrixMarketTest, GeneratorReadWithTransposedIsRefusedSayingToLeaveItOut) {
    const auto path = dir.write("q.mtx", banner + "2 2 4\n1 1 -2\n1 2 2\n2 1 3\n2 2 -3\n");
    expect_mentions(refusal(path, ChainKind::ctmc, {.transposed = true}),
                    {"column 1 ", "diagonal -2", "sum to 3", "leave out --transposed"});
}

// Neither orientation balances (row 2: diagonal -5 against rates 2 + 1;
// column 1: -1 against 2 + 0): --transposed would not help, so it is not offered.
TEST_F(MatrixMarketTest, WrongDiagonalIsRefusedWithoutOfferingTransposed) {
    const auto path = dir.write("q.mtx", banner + "3 3 7\n"
                                                  "1 1 -1\n"
                                                  "1 2 1\n"
                                                  "2 1 2\n"
                                                  "2 2 -5\n"
                                                  "2 3 1\n"
                                                  "3 2 1\n"
                                                  "3 3 -1\n");
    const auto as_rows = refusal(path, ChainKind::ctmc);
    expect_mentions(as_rows, {"row 2 ", "diagonal -5", "sum to 3"});
    EXPECT_EQ(as_rows.find("--transposed"), std::string::npos) << as_rows;
    const auto as_columns = refusal(path, ChainKind::ctmc, {.transposed = true});
    expect_mentions(as_columns, {"column 1 ", "diagonal -1", "sum to 2"});
    EXPECT_EQ(as_columns.find("--transposed"), std::string::npos) << as_columns;
}

// The balance is relative, under --row-sum-tol: a diagonal printed with six
// significant digits (-0.666667 for rates 1/3 + 1/3) is off by 5e-7 of itself.
TEST_F(MatrixMarketTest, DiagonalBalanceUsesTheRelativeRowSumTolerance) {
    const auto path = dir.write("q.mtx", banner + "3 3 6\n"
                                                  "1 1 -0.666667\n"
                                                  "1 2 0.3333333333333333\n"
                                                  "1 3 0.3333333333333333\n"
                                                  "2 1 1\n"
                                                  "3 1 1e-300\n"
                                                  "3 3 -1e-300\n");
    expect_mentions(refusal(path, ChainKind::ctmc), {"row 1 ", "--row-sum-tol"});
    const Chain c = read_matrix_market(path, ChainKind::ctmc, {.row_sum_tolerance = 1e-6});
    EXPECT_EQ(c.transitions, 4u);
}

// P of a birth-death dtmc on 0..2, [[0.5, 0.5, 0], [0.25, 0.5, 0.25], [0, 0.5, 0.5]],
// stored as P^T: row 1 of the file sums to 0.75, every column to 1.
const std::string stochastic_transposed = banner + "3 3 7\n"
                                                   "1 1 0.5\n"
                                                   "1 2 0.25\n"
                                                   "2 1 0.5\n"
                                                   "2 2 0.5\n"
                                                   "2 3 0.5\n"
                                                   "3 2 0.25\n"
                                                   "3 3 0.5\n";

TEST_F(MatrixMarketTest, TransposedTransitionMatrixIsRefusedNamingRowSumsAndOption) {
    const auto path = dir.write("pt.mtx", stochastic_transposed);
    expect_mentions(refusal(path, ChainKind::dtmc),
                    {"row 1 ", "sum to 0.75", "column 1 sums to 1", "P^T", "--transposed"});
}

TEST_F(MatrixMarketTest, TransposedTransitionMatrixReadWithTransposedIsP) {
    const auto path = dir.write("pt.mtx", stochastic_transposed);
    const Chain c = read_matrix_market(path, ChainKind::dtmc, {.transposed = true});
    EXPECT_EQ(c.offsets, (std::vector<std::uint64_t>{0, 2, 5, 7}));
    EXPECT_EQ(c.targets, (std::vector<std::uint64_t>{0, 1, 0, 1, 2, 1, 2}));
    EXPECT_EQ(c.weights, (std::vector<double>{0.5, 0.5, 0.25, 0.5, 0.25, 0.5, 0.5}));
}

// Rows that are off without the columns fitting are the validator's to judge
// (refused, or rescaled under --renormalize): the reader accepts them.
TEST_F(MatrixMarketTest, RowsOffWithColumnsOffAreLeftToTheValidator) {
    const auto path = dir.write("p.mtx", banner + "2 2 3\n1 1 0.5\n1 2 0.25\n2 1 1\n");
    EXPECT_EQ(read_matrix_market(path, ChainKind::dtmc).transitions, 3u);
}

TEST_F(MatrixMarketTest, TransposedDuplicateNamesTheFileCoordinates) {
    const auto path = dir.write("pt.mtx", banner + "2 2 3\n2 1 0.5\n1 2 1\n2 1 0.5\n");
    expect_mentions(refusal(path, ChainKind::dtmc, {.transposed = true}),
                    {"line 5", "duplicate entry (2, 1)", "line 3"});
}

TEST_F(MatrixMarketTest, MissingFileThrowsInputErrorNamingIt) {
    const auto path = (dir.path() / "absent.mtx").string();
    try {
        read_matrix_market(path, ChainKind::dtmc);
        ADD_FAILURE() << "no error";
    } catch (const InputError& e) {
        EXPECT_EQ(std::string(e.what()).rfind(path + ": ", 0), 0u) << e.what();
    }
}

// One malformed file per construct the reader must refuse, with the line the
// message must point at and words it must contain.
struct Reject {
    std::string name;
    ChainKind kind;
    std::string content;
    int line;
    std::vector<std::string> words;
};

std::ostream& operator<<(std::ostream& os, const Reject& r) {
    return os << r.name;
}

const std::string size23 = banner + "2 2 3\n";

std::vector<Reject> reject_cases() {
    const auto d = ChainKind::dtmc;
    const auto q = ChainKind::ctmc;
    return {
        {"EmptyFile", d, "", 1, {"banner"}},
        {"MissingBanner", d, "2 2 1\n1 2 1\n", 1, {"banner"}},
        {"MisspeltBanner",
         d,
         "%%MatrixMarkt matrix coordinate real general\n2 2 0\n",
         1,
         {"banner"}},
        {"IncompleteBanner", d, "%%MatrixMarket matrix coordinate real\n2 2 0\n", 1, {"banner"}},
        {"TrailingTextAfterBanner",
         d,
         "%%MatrixMarket matrix coordinate real general x\n",
         1,
         {"'x'"}},
        {"VectorObject", d, "%%MatrixMarket vector coordinate real general\n", 1, {"'vector'"}},
        {"ArrayFormat",
         d,
         "%%MatrixMarket matrix array real general\n2 2\n1\n0\n0\n1\n",
         1,
         {"'array'", "coordinate"}},
        {"PatternField",
         d,
         "%%MatrixMarket matrix coordinate pattern general\n2 2 1\n1 2\n",
         1,
         {"pattern", "real weights"}},
        {"ComplexField",
         d,
         "%%MatrixMarket matrix coordinate complex general\n2 2 1\n1 2 1 0\n",
         1,
         {"complex", "real weights"}},
        {"SymmetricMatrix",
         d,
         "%%MatrixMarket matrix coordinate real symmetric\n2 2 1\n2 1 1\n",
         1,
         {"symmetric", "general"}},
        {"SkewSymmetricMatrix",
         d,
         "%%MatrixMarket matrix coordinate real skew-symmetric\n2 2 1\n2 1 1\n",
         1,
         {"skew-symmetric", "general"}},
        {"HermitianMatrix",
         d,
         "%%MatrixMarket matrix coordinate real hermitian\n2 2 1\n2 1 1\n",
         1,
         {"hermitian", "general"}},
        {"GzipFile", d, std::string("\x1f\x8b\x08\0\0\0", 6), 1, {"banner", "gzip"}},
        {"MissingSizeLine", d, banner + "% only comments\n\n", 3, {"size line"}},
        {"NonSquareSize", d, banner + "2 3 1\n1 2 1\n", 2, {"2 x 3", "square"}},
        {"ZeroSize", d, banner + "0 0 0\n", 2, {"at least one state"}},
        {"NegativeRows", d, banner + "-2 -2 1\n1 1 1\n", 2, {"negative", "rows"}},
        {"NegativeEntryCount", d, banner + "2 2 -1\n", 2, {"negative", "entries"}},
        {"UnparsableSize", d, banner + "2 two 1\n", 2, {"'two'", "integer"}},
        {"TooLargeSize", d, banner + "99999999999999999999 2 1\n", 2, {"too large"}},
        {"ShortSizeLine", d, banner + "2 2\n", 2, {"rows columns entries"}},
        {"TrailingTextAfterSize", d, banner + "2 2 1 7\n1 2 1\n", 2, {"'7'"}},
        {"MoreEntriesThanAMatrixHolds", d, banner + "2 2 5\n", 2, {"more than a 2 x 2"}},
        // 2^40 states claimed: refused before anything of that size exists.
        {"HugeStateCountWithFewEntries",
         d,
         banner + "1099511627776 1099511627776 3\n1 2 1\n2 1 1\n3 1 1\n",
         2,
         {"1099511627776 states", "3 entries"}},
        // 2^41 entries claimed: the reader must run out of file, not of memory.
        {"HugeEntryCountWithFewEntries",
         d,
         banner + "1099511627776 1099511627776 2199023255552\n1 2 1\n2 1 1\n3 1 1\n",
         5,
         {"ends after 3 of the 2199023255552"}},
        {"ZeroIndex", d, size23 + "1 2 1\n0 1 1\n2 1 1\n", 4, {"row index 0", "1-based"}},
        {"NegativeIndex", d, size23 + "1 2 1\n2 -1 1\n2 1 1\n", 4, {"column index -1", "1-based"}},
        {"IndexBeyondSize", d, size23 + "1 3 1\n", 3, {"column index 3", "1-based"}},
        {"NonIntegerIndex", d, size23 + "1.0 2 1\n", 3, {"'1.0'", "not an integer"}},
        {"FewerEntriesThanDeclared",
         d,
         size23 + "1 2 1\n2 1 1\n",
         4,
         {"ends after 2 of the 3", "line 2"}},
        {"MoreEntriesThanDeclared",
         d,
         size23 + "1 2 1\n2 1 0.5\n2 2 0.5\n1 1 0\n",
         6,
         {"more entries", "3"}},
        {"MissingValue", d, size23 + "1 2\n", 3, {"row column value"}},
        {"UnparsableValue", d, size23 + "1 2 half\n", 3, {"'half'", "not a number"}},
        {"TrailingTextAfterValue", d, size23 + "1 2 1 x\n", 3, {"'x'", "after the value"}},
        {"NanValue", d, size23 + "1 2 nan\n", 3, {"'nan'", "not finite"}},
        {"InfiniteValue", q, size23 + "1 2 inf\n", 3, {"'inf'", "not finite"}},
        {"ValueBeyondDoubleRange", d, size23 + "1 2 1e999\n", 3, {"'1e999'", "range"}},
        {"DuplicateEntry",
         d,
         size23 + "1 2 0.5\n2 1 1\n1 2 0.5\n",
         5,
         {"duplicate entry (1, 2)", "line 3"}},
        {"DuplicateGeneratorDiagonal",
         q,
         size23 + "1 1 -1\n1 2 1\n1 1 -1\n",
         5,
         {"duplicate entry (1, 1)", "line 3"}},
        {"PositiveGeneratorDiagonal",
         q,
         size23 + "1 2 1\n2 2 0.5\n2 1 1\n",
         4,
         {"positive diagonal in a ctmc generator", "(2, 2)"}},
        {"NegativeRate", q, size23 + "1 1 -1\n1 2 -1\n2 1 1\n", 4, {"negative rate"}},
        {"NegativeProbability", d, size23 + "1 1 -1\n", 3, {"negative probability"}},
        {"OverlongLine", d, banner + std::string(3 << 20, '%'), 2, {"longer than"}},
    };
}

class MatrixMarketRejects : public testing::TestWithParam<Reject> {
  protected:
    TempDir dir;
};

TEST_P(MatrixMarketRejects, WithFileAndLineInOneLineMessage) {
    const Reject& r = GetParam();
    const auto path = dir.write(r.name + ".mtx", r.content);
    try {
        read_matrix_market(path, r.kind);
        ADD_FAILURE() << "no error";
    } catch (const InputError& e) {
        const std::string message = e.what();
        const std::string prefix = path + ": line " + std::to_string(r.line) + ": ";
        EXPECT_EQ(message.rfind(prefix, 0), 0u) << message;
        EXPECT_EQ(message.find('\n'), std::string::npos) << message;
        for (const auto& word : r.words)
            EXPECT_NE(message.find(word), std::string::npos) << "'" << word << "' in " << message;
    }
}

INSTANTIATE_TEST_SUITE_P(Cases, MatrixMarketRejects, testing::ValuesIn(reject_cases()),
                         [](const testing::TestParamInfo<Reject>& info) {
                             return info.param.name;
                         });

// rw136.mtx: see tests/data/README.md for its source and its known fault.
std::string rw136_path() {
    const char* root = std::getenv("LONGRUN_SOURCE_DIR");
    return root ? std::string(root) + "/tests/data/rw136.mtx" : std::string();
}

TEST(MatrixMarketRw136, ReadsAsDtmcWith136StatesAnd479Transitions) {
    const auto path = rw136_path();
    ASSERT_FALSE(path.empty()) << "LONGRUN_SOURCE_DIR is not set";
    const Chain c = read_matrix_market(path, ChainKind::dtmc);
    EXPECT_EQ(c.states, 136u);
    EXPECT_EQ(c.transitions, 479u);
    EXPECT_EQ(c.offsets.back(), 479u);
}

TEST(MatrixMarketRw136, RowSumCheckFindsTheMissingEntry) {
    const auto path = rw136_path();
    ASSERT_FALSE(path.empty()) << "LONGRUN_SOURCE_DIR is not set";
    Chain c = read_matrix_market(path, ChainKind::dtmc);
    longrun::io::ValidationReport report;
    const auto fault = longrun::io::validate_slice(c, path, {}, report);
    ASSERT_TRUE(fault.has_value());
    // Row 134 of the file, 0-based 133.
    EXPECT_EQ(fault->row, 133u);
    EXPECT_NE(fault->message.find("sum"), std::string::npos) << fault->message;
}

TEST(MatrixMarketRw136, RenormalisingAddsBackTheMissingThirtieth) {
    const auto path = rw136_path();
    ASSERT_FALSE(path.empty()) << "LONGRUN_SOURCE_DIR is not set";
    Chain c = read_matrix_market(path, ChainKind::dtmc);
    longrun::io::ValidationOptions options;
    options.renormalize = true;
    longrun::io::ValidationReport report;
    const auto fault = longrun::io::validate_slice(c, path, options, report);
    EXPECT_FALSE(fault.has_value()) << fault->message;
    EXPECT_EQ(report.renormalized_rows, 1u);
    EXPECT_NEAR(report.largest_correction, 1.0 / 30, 1e-8);
}

} // namespace

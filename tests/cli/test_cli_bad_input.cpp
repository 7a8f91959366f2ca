// What a user sees when `longrun` is handed something wrong. A batch script can
// only go by the exit code and the log, so every refusal must be exactly one
// line that says which file (and which dataset and first row) is at fault, must
// leave no result and no half-written temporary file behind, and must never
// touch the input. Under mpirun every rank must agree and the job must end
// with the same code instead of hanging or aborting.
//
// Broken chain files are made with the io writer (which writes anything it is
// given) and, for what that writer cannot express, the raw HDF5 C API.
#include "run_command.hpp"

#include "io/chain.hpp"
#include "io/chain_file.hpp"
#include "io/error.hpp"

#include <gtest/gtest.h>
#include <hdf5.h>

#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <limits>
#include <numeric>
#include <set>
#include <string>
#include <vector>

namespace fs = std::filesystem;
using longrun::ExitCode;
using longrun::io::Chain;
using longrun::io::ChainKind;
using longrun::test::CommandOptions;
using longrun::test::CommandResult;
using longrun::test::lines_of;
using longrun::test::run_command;

namespace {

constexpr const char* mpirun = "/usr/bin/mpirun";
constexpr uid_t nobody = 65534;

int code(ExitCode c) {
    return static_cast<int>(c);
}

std::string longrun_binary() {
    const char* b = std::getenv("LONGRUN_BINARY");
    return b ? b : "";
}

std::string read_bytes(const fs::path& p) {
    std::ifstream in(p, std::ios::binary);
    return {std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>()};
}

// Six states; row r goes to r-1, r+1 and r+2 (mod 6) with 1/4, 1/2, 1/4 in
// target order. Irreducible and aperiodic, so the valid file solves. Row 3 is
// entries 9..11 with targets {2, 4, 5}: the cases below break row 3 (not row
// 0) so that a message naming the wrong row cannot pass.
Chain six_state_dtmc() {
    Chain c;
    c.kind = ChainKind::dtmc;
    c.states = 6;
    c.rows = {0, 6};
    c.offsets = {0};
    for (std::uint64_t r = 0; r < 6; ++r) {
        std::set<std::uint64_t> t{(r + 5) % 6, (r + 1) % 6, (r + 2) % 6};
        const double w[3] = {0.25, 0.5, 0.25};
        int i = 0;
        for (auto target : t) {
            c.targets.push_back(target);
            c.weights.push_back(w[i++]);
        }
        c.offsets.push_back(c.targets.size());
    }
    c.transitions = c.targets.size();
    return c;
}
constexpr std::size_t row3 = 9; // first entry of row 3
constexpr std::size_t row4 = 12;
constexpr std::size_t row1 = 3;

// Probabilities that are not short binary fractions, so that no solver can hit
// a residual of exactly zero (the six-state chain above can).
Chain awkward_dtmc() {
    const std::uint64_t n = 40;
    std::vector<std::uint64_t> s, t;
    std::vector<double> w;
    for (std::uint64_t r = 0; r < n; ++r)
        for (auto [step, p] : {std::pair{1u, 1.0 / 3}, {3u, 2.0 / 7}, {7u, 8.0 / 21}}) {
            s.push_back(r);
            t.push_back((r + step) % n);
            w.push_back(p);
        }
    return longrun::io::chain_from_triples(ChainKind::dtmc, n, s, t, w);
}

// Raw edits of a finished file: what another tool, or a bug, could leave.
class RawFile {
  public:
    explicit RawFile(const fs::path& p) : id_(H5Fopen(p.c_str(), H5F_ACC_RDWR, H5P_DEFAULT)) {
        if (id_ < 0)
            throw std::runtime_error("cannot open " + p.string() + " for editing");
    }
    RawFile(const RawFile&) = delete;
    RawFile& operator=(const RawFile&) = delete;
    ~RawFile() { H5Fclose(id_); }

    void remove(const char* path) { check(H5Ldelete(id_, path, H5P_DEFAULT), path); }

    // Replaces a dataset by one of any type and shape.
    void replace(const char* path, hid_t type, const std::vector<hsize_t>& dims, const void* data) {
        if (H5Lexists(id_, path, H5P_DEFAULT) > 0)
            remove(path);
        const hid_t space = H5Screate_simple(static_cast<int>(dims.size()), dims.data(), nullptr);
        const hid_t d = H5Dcreate2(id_, path, type, space, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
        check(d, path);
        check(H5Dwrite(d, type, H5S_ALL, H5S_ALL, H5P_DEFAULT, data), path);
        H5Dclose(d);
        H5Sclose(space);
    }

    void set_u64(const char* object, const char* name, std::uint64_t value) {
        set(object, name, H5T_NATIVE_UINT64, &value);
    }
    void set_string(const char* object, const char* name, const std::string& value) {
        const hid_t type = H5Tcopy(H5T_C_S1);
        H5Tset_size(type, value.size());
        set(object, name, type, value.c_str());
        H5Tclose(type);
    }

  private:
    void set(const char* object, const char* name, hid_t type, const void* value) {
        if (H5Aexists_by_name(id_, object, name, H5P_DEFAULT) > 0)
            check(H5Adelete_by_name(id_, object, name, H5P_DEFAULT), name);
        const hid_t space = H5Screate(H5S_SCALAR);
        const hid_t a = H5Acreate_by_name(id_, object, name, type, space, H5P_DEFAULT, H5P_DEFAULT,
                                          H5P_DEFAULT);
        check(a, name);
        check(H5Awrite(a, type, value), name);
        H5Aclose(a);
        H5Sclose(space);
    }
    static void check(long long status, const char* what) {
        if (status < 0)
            throw std::runtime_error(std::string("HDF5 edit failed: ") + what);
    }
    hid_t id_;
};

std::set<std::string> listing(const fs::path& dir) {
    std::set<std::string> names;
    for (const auto& e : fs::directory_iterator(dir))
        names.insert(e.path().filename().string());
    return names;
}

class CliBadInput : public testing::Test {
  protected:
    void SetUp() override {
        binary_ = longrun_binary();
        ASSERT_FALSE(binary_.empty()) << "LONGRUN_BINARY is not set; run this through ctest";
        ASSERT_TRUE(fs::exists(binary_)) << binary_;
        std::string pattern = (fs::temp_directory_path() / "longrun-cli-XXXXXX").string();
        ASSERT_NE(mkdtemp(pattern.data()), nullptr);
        dir_ = pattern;
        // A child that dropped root's privileges must still be able to enter.
        fs::permissions(dir_, fs::perms::owner_all | fs::perms::group_read | fs::perms::group_exec |
                                  fs::perms::others_read | fs::perms::others_exec);
        out_ = dir_ / "OUT.h5";
    }
    void TearDown() override {
        std::error_code ignored;
        fs::remove_all(dir_, ignored);
    }

    fs::path write_chain(const std::string& name, const Chain& c) {
        const auto p = dir_ / name;
        longrun::io::write_chain_file(p.string(), c);
        return p;
    }
    fs::path write_text(const std::string& name, const std::string& text) {
        const auto p = dir_ / name;
        std::ofstream(p, std::ios::binary) << text;
        return p;
    }

    std::vector<std::string> command(const std::vector<std::string>& args, int ranks) const {
        std::vector<std::string> argv;
        if (ranks > 0)
            // -q: mpirun's own banner about non-zero exits would hide whether
            // longrun itself printed one line.
            argv = {mpirun, "-q", "-n", std::to_string(ranks), "--oversubscribe"};
        argv.push_back(binary_);
        argv.insert(argv.end(), args.begin(), args.end());
        return argv;
    }

    // Runs `args` (ranks > 0: under mpirun) and checks everything a refusal
    // promises. `input` is the file whose bytes must survive and, unless
    // `names_input` is false, be named in the message; `mentions` are further
    // pieces the line must contain.
    CommandResult expect_refused(const std::vector<std::string>& args, const fs::path& input,
                                 int expected_code, const std::vector<std::string>& mentions,
                                 int ranks = 0, CommandOptions options = {},
                                 bool names_input = true) {
        const bool input_exists = fs::exists(input);
        const std::string before = input_exists ? read_bytes(input) : std::string();
        const auto files_before = listing(dir_);
        const CommandResult r = run_command(command(args, ranks), options);

        EXPECT_FALSE(r.timed_out) << r.describe();
        EXPECT_EQ(r.exit_code, expected_code) << r.describe();
        const auto lines = lines_of(r.err);
        EXPECT_EQ(lines.size(), 1u) << "a refusal is one line on stderr\n" << r.describe();
        const std::string first = lines.empty() ? std::string() : lines.front();
        EXPECT_TRUE(first.starts_with("longrun: error")) << r.describe();
        // A rank-tagged line means the ranks did not agree on the error.
        EXPECT_EQ(first.find("(rank"), std::string::npos) << r.describe();
        if (names_input) {
            EXPECT_NE(first.find(input.string()), std::string::npos)
                << "the message must name " << input << "\n"
                << r.describe();
        }
        for (const auto& m : mentions)
            EXPECT_NE(first.find(m), std::string::npos)
                << "the message must mention '" << m << "'\n"
                << r.describe();
        EXPECT_TRUE(r.out.empty()) << "nothing on stdout after a refusal\n" << r.describe();

        EXPECT_FALSE(fs::exists(out_)) << "a refused run must not leave " << out_;
        for (const auto& name : listing(dir_))
            EXPECT_FALSE(name.starts_with("." + out_.filename().string() + ".tmp"))
                << "leftover temporary file " << name;
        EXPECT_EQ(listing(dir_), files_before) << "the folder changed";
        EXPECT_EQ(fs::exists(input), input_exists);
        if (input_exists) {
            EXPECT_TRUE(read_bytes(input) == before) << "the input " << input << " was modified";
        }
        return r;
    }

    std::vector<std::string> solve_args(const fs::path& input,
                                        const std::vector<std::string>& extra) const {
        std::vector<std::string> args{"solve", input.string(), "-o", out_.string(), "-q"};
        args.insert(args.end(), extra.begin(), extra.end());
        return args;
    }

    // `longrun solve INPUT -o OUT.h5 -q [extra...]`, refused because of INPUT.
    CommandResult expect_solve_refused(const fs::path& input, int expected_code,
                                       const std::vector<std::string>& mentions,
                                       const std::vector<std::string>& extra = {}, int ranks = 0,
                                       CommandOptions options = {}) {
        return expect_refused(solve_args(input, extra), input, expected_code, mentions, ranks,
                              options);
    }

    // `longrun solve INPUT -o OUT.h5 -q [extra...]`, accepted: the result is
    // complete, sums to one and sits under its final name only.
    void expect_solved(const fs::path& input, std::uint64_t states,
                       const std::vector<std::string>& extra) {
        const std::string before = read_bytes(input);
        const CommandResult r = run_command(command(solve_args(input, extra), 0));
        ASSERT_EQ(r.exit_code, 0) << r.describe();
        EXPECT_TRUE(r.err.empty()) << "-q: nothing on stderr\n" << r.describe();
        ASSERT_TRUE(fs::exists(out_));
        for (const auto& name : listing(dir_))
            EXPECT_FALSE(name.starts_with(".OUT.h5.tmp")) << "leftover temporary file " << name;
        EXPECT_TRUE(read_bytes(input) == before) << "the input was modified";

        const hid_t f = H5Fopen(out_.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT);
        ASSERT_GE(f, 0);
        const hid_t d = H5Dopen2(f, "/distribution", H5P_DEFAULT);
        ASSERT_GE(d, 0);
        const hid_t space = H5Dget_space(d);
        hsize_t n = 0;
        H5Sget_simple_extent_dims(space, &n, nullptr);
        std::vector<double> pi(n);
        if (n == states)
            H5Dread(d, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, pi.data());
        H5Sclose(space);
        H5Dclose(d);
        H5Fclose(f);
        ASSERT_EQ(n, states);
        EXPECT_NEAR(std::accumulate(pi.begin(), pi.end(), 0.0), 1.0, 1e-12);
        for (double p : pi)
            EXPECT_GT(p, 0.0);
    }

    std::string binary_;
    fs::path dir_, out_;
};

// --- the file itself ------------------------------------------------------

TEST_F(CliBadInput, MissingFile) {
    expect_solve_refused(dir_ / "no-such-chain.h5", code(ExitCode::bad_input), {});
}

TEST_F(CliBadInput, UnreadableFile) {
    const auto bad = write_chain("locked.h5", six_state_dtmc());
    fs::permissions(bad, fs::perms::none);
    CommandOptions as_user;
    if (geteuid() == 0) // root reads anything; nobody does not
        as_user.run_as = nobody;
    expect_solve_refused(bad, code(ExitCode::bad_input), {}, {}, 0, as_user);
    fs::permissions(bad, fs::perms::owner_read | fs::perms::owner_write);
}

TEST_F(CliBadInput, TextFileIsNotHdf5) {
    const auto bad = write_text("notes.h5", "states,transitions\n6,18\n");
    expect_solve_refused(bad, code(ExitCode::bad_input), {"HDF5"});
}

TEST_F(CliBadInput, TruncatedHdf5) {
    const auto bad = write_chain("cut.h5", six_state_dtmc());
    fs::resize_file(bad, fs::file_size(bad) / 2);
    expect_solve_refused(bad, code(ExitCode::bad_input), {});
}

// --- schema and header ----------------------------------------------------

TEST_F(CliBadInput, MissingTargetsDataset) {
    const auto bad = write_chain("no-targets.h5", six_state_dtmc());
    RawFile(bad).remove("/chain/targets");
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/targets", "missing"});
}

TEST_F(CliBadInput, WrongSchemaAttribute) {
    const auto bad = write_chain("other-schema.h5", six_state_dtmc());
    RawFile(bad).set_string("/", "schema", "someone.else.graph");
    expect_solve_refused(bad, code(ExitCode::bad_input), {"schema", "someone.else.graph"});
}

TEST_F(CliBadInput, UnsupportedSchemaVersion) {
    const auto bad = write_chain("v2.h5", six_state_dtmc());
    RawFile(bad).set_u64("/", "schema_version", 2);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"version 2"});
}

TEST_F(CliBadInput, TargetsShorterThanTransitions) {
    auto c = six_state_dtmc();
    c.targets.pop_back(); // `transitions` still says 18
    const auto bad = write_chain("short-targets.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/targets", "17", "18"});
}

// The header is checked against the dataset sizes before anything is sized by
// it: a lying `states` must cost neither time nor memory.
TEST_F(CliBadInput, HugeStatesAttributeFailsFast) {
    const auto bad = write_chain("huge.h5", six_state_dtmc());
    RawFile(bad).set_u64("/chain", "states", std::uint64_t{1} << 40);
    CommandOptions small;
#ifndef LONGRUN_TEST_NO_ADDRESS_LIMIT
    // A valid run needs a few hundred MiB of address space; one vector of 2^40
    // offsets needs 8 TiB.
    small.address_space_limit = std::uint64_t{2} << 30;
#endif
    const auto r =
        expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/offsets"}, {}, 0, small);
    EXPECT_LT(r.seconds, 60.0) << "refusing a lying header must be quick";
}

TEST_F(CliBadInput, WeightsStoredAsStrings) {
    const auto bad = write_chain("string-weights.h5", six_state_dtmc());
    const hid_t type = H5Tcopy(H5T_C_S1);
    H5Tset_size(type, 8);
    std::vector<char> text(18 * 8, '\0');
    for (std::size_t k = 0; k < 18; ++k)
        std::snprintf(text.data() + 8 * k, 8, "%s", k % 3 == 1 ? "0.5" : "0.25");
    RawFile(bad).replace("/chain/weights", type, {18}, text.data());
    H5Tclose(type);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/weights", "type"});
}

TEST_F(CliBadInput, WeightsStoredAsIntegers) {
    const auto bad = write_chain("integer-weights.h5", six_state_dtmc());
    const std::vector<std::int64_t> ones(18, 1);
    RawFile(bad).replace("/chain/weights", H5T_NATIVE_INT64, {18}, ones.data());
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/weights", "type"});
}

TEST_F(CliBadInput, TwoDimensionalOffsets) {
    const auto c = six_state_dtmc();
    const auto bad = write_chain("offsets-2d.h5", c);
    RawFile(bad).replace("/chain/offsets", H5T_NATIVE_UINT64, {7, 1}, c.offsets.data());
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/offsets", "dimensions"});
}

// --- row pointer ----------------------------------------------------------

TEST_F(CliBadInput, OffsetsDecrease) {
    auto c = six_state_dtmc();
    c.offsets[4] = 8; // row 3 would run from 9 back to 8
    const auto bad = write_chain("offsets-decrease.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/offsets", "row 3"});
}

TEST_F(CliBadInput, OffsetsEndBeforeTransitions) {
    auto c = six_state_dtmc();
    c.offsets.back() = 17;
    const auto bad = write_chain("offsets-end-short.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/offsets", "17", "18"});
}

TEST_F(CliBadInput, OffsetsRunPastTransitions) {
    auto c = six_state_dtmc();
    c.offsets.back() = 19;
    const auto bad = write_chain("offsets-end-long.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/offsets", "row 5", "19"});
}

TEST_F(CliBadInput, OffsetsDoNotStartAtZero) {
    auto c = six_state_dtmc();
    c.offsets.front() = 1;
    const auto bad = write_chain("offsets-start.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/offsets", "row 0"});
}

// --- targets --------------------------------------------------------------

TEST_F(CliBadInput, TargetOutOfRange) {
    auto c = six_state_dtmc();
    c.targets[row3 + 2] = 6; // one past the last state
    const auto bad = write_chain("target-range.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/targets", "row 3", "6"});
}

TEST_F(CliBadInput, TargetsNotIncreasing) {
    auto c = six_state_dtmc();
    std::swap(c.targets[row3], c.targets[row3 + 1]); // {4, 2, 5}
    const auto bad = write_chain("target-order.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/targets", "row 3"});
}

TEST_F(CliBadInput, DuplicateTarget) {
    auto c = six_state_dtmc();
    c.targets[row3 + 2] = c.targets[row3 + 1]; // {2, 4, 4}
    const auto bad = write_chain("target-twice.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/targets", "row 3", "twice"});
}

// --- weights --------------------------------------------------------------

TEST_F(CliBadInput, WeightNaN) {
    auto c = six_state_dtmc();
    c.weights[row3 + 1] = std::numeric_limits<double>::quiet_NaN();
    const auto bad = write_chain("weight-nan.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/weights", "row 3"});
}

TEST_F(CliBadInput, WeightInfinite) {
    auto c = six_state_dtmc();
    c.weights[row3 + 1] = std::numeric_limits<double>::infinity();
    const auto bad = write_chain("weight-inf.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/weights", "row 3"});
}

TEST_F(CliBadInput, WeightNegative) {
    auto c = six_state_dtmc();
    c.weights[row3] = -0.25;
    c.weights[row3 + 1] = 1.0; // the row still sums to 1: the sign alone is the fault
    const auto bad = write_chain("weight-negative.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/weights", "row 3", "negative"});
}

Chain row3_sums_to_0_9() {
    auto c = six_state_dtmc();
    c.weights[row3 + 1] = 0.4;
    return c;
}

TEST_F(CliBadInput, RowSumOffRefused) {
    const auto bad = write_chain("row-sum.h5", row3_sums_to_0_9());
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/weights", "row 3", "0.9"});
}

TEST_F(CliBadInput, RowSumOffAcceptedWithRenormalize) {
    const auto bad = write_chain("row-sum.h5", row3_sums_to_0_9());
    expect_solved(bad, 6, {"--renormalize"});
}

TEST_F(CliBadInput, RowSumOffAcceptedWithLooseTolerance) {
    const auto bad = write_chain("row-sum.h5", row3_sums_to_0_9());
    expect_solved(bad, 6, {"--row-sum-tol", "0.2"});
}

// Data rounded to 9 digits passes the default row-sum check; the default
// certificate (1e-10) must then still be reachable.
TEST_F(CliBadInput, RowSumWithinDefaultToleranceIsCertified) {
    auto c = six_state_dtmc();
    c.weights[row3 + 1] = 0.499999995;
    const auto rounded = write_chain("rounded.h5", c);
    expect_solved(rounded, 6, {});
}

// --- the command line -----------------------------------------------------

TEST_F(CliBadInput, UnknownOption) {
    const auto good = write_chain("good.h5", six_state_dtmc());
    expect_refused({"solve", good.string(), "-o", out_.string(), "-q", "--no-such-option"}, good,
                   code(ExitCode::usage), {"--no-such-option"}, 0, {}, false);
}

TEST_F(CliBadInput, UnknownMethod) {
    const auto good = write_chain("good.h5", six_state_dtmc());
    expect_refused(solve_args(good, {"--method", "fastest"}), good, code(ExitCode::usage),
                   {"--method", "fastest"}, 0, {}, false);
}

TEST_F(CliBadInput, OutputIsTheInput) {
    const auto good = write_chain("good.h5", six_state_dtmc());
    expect_refused({"solve", good.string(), "-o", good.string(), "-q"}, good, code(ExitCode::usage),
                   {"input"});
}

TEST_F(CliBadInput, OutputIsTheInputUnderAnotherName) {
    const auto good = write_chain("good.h5", six_state_dtmc());
    const auto alias = dir_ / "alias.h5";
    fs::create_symlink(good, alias);
    expect_refused({"solve", good.string(), "-o", alias.string(), "-q"}, good,
                   code(ExitCode::usage), {alias.string()}, 0, {}, false);
}

TEST_F(CliBadInput, OutputFolderMissing) {
    const auto good = write_chain("good.h5", six_state_dtmc());
    const auto nowhere = dir_ / "missing-folder" / "OUT.h5";
    expect_refused({"solve", good.string(), "-o", nowhere.string(), "-q"}, good,
                   code(ExitCode::usage), {nowhere.string()}, 0, {}, false);
    EXPECT_FALSE(fs::exists(nowhere.parent_path()));
}

// --- numerics -------------------------------------------------------------

TEST_F(CliBadInput, ToleranceThatCannotBeMet) {
    const auto good = write_chain("awkward.h5", awkward_dtmc());
    expect_solve_refused(good, code(ExitCode::numerical), {"1.0e-30"}, {"--tol", "1e-30"});
}

// --- convert --------------------------------------------------------------

const std::string mtx_body = "3 3 4\n1 2 1.0\n2 1 0.5\n2 3 0.5\n3 1 1.0\n";

TEST_F(CliBadInput, ConvertMatrixMarketWithoutKind) {
    const auto in =
        write_text("p.mtx", "%%MatrixMarket matrix coordinate real general\n" + mtx_body);
    expect_refused({"convert", in.string(), out_.string()}, in, code(ExitCode::usage), {"--kind"},
                   0, {}, false);
}

TEST_F(CliBadInput, ConvertMatrixMarketBadBanner) {
    const auto in =
        write_text("p.mtx", "%%MatrixMarket matrix coordinate complex general\n" + mtx_body);
    expect_refused({"convert", in.string(), out_.string(), "--kind", "dtmc"}, in,
                   code(ExitCode::bad_input), {"line 1"});
}

// A typo in the first word still makes a Matrix Market file, not a chain file:
// the user must hear about line 1, not about HDF5 or about --kind.
TEST_F(CliBadInput, ConvertMatrixMarketMisspeltBanner) {
    const auto in =
        write_text("p.mtx", "%%MatrixMarkt matrix coordinate real general\n" + mtx_body);
    expect_refused({"convert", in.string(), out_.string(), "--kind", "dtmc"}, in,
                   code(ExitCode::bad_input), {"line 1"});
}

TEST_F(CliBadInput, ConvertMissingInput) {
    expect_refused({"convert", (dir_ / "absent.h5").string(), out_.string()}, dir_ / "absent.h5",
                   code(ExitCode::bad_input), {});
}

// --- two ranks: one agreed line, one exit code, no hang ---------------------

TEST_F(CliBadInput, TwoRanksFaultOnSecondRank) {
    auto c = six_state_dtmc();
    c.targets[row4 + 2] = 6; // rows 3..5 are the second rank's
    const auto bad = write_chain("target-range.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/targets", "row 4"}, {}, 2);
}

TEST_F(CliBadInput, TwoRanksLowestRowWins) {
    auto c = six_state_dtmc();
    c.weights[row1] = std::numeric_limits<double>::quiet_NaN();
    c.weights[row4] = -1.0;
    const auto bad = write_chain("two-faults.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/weights", "row 1"}, {}, 2);
}

TEST_F(CliBadInput, TwoRanksOffsetsDecrease) {
    auto c = six_state_dtmc();
    c.offsets[4] = 8;
    const auto bad = write_chain("offsets-decrease.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/offsets", "row 3"}, {}, 2);
}

TEST_F(CliBadInput, TwoRanksMissingDataset) {
    const auto bad = write_chain("no-targets.h5", six_state_dtmc());
    RawFile(bad).remove("/chain/targets");
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/targets"}, {}, 2);
}

TEST_F(CliBadInput, TwoRanksHugeStatesAttribute) {
    const auto bad = write_chain("huge.h5", six_state_dtmc());
    RawFile(bad).set_u64("/chain", "states", std::uint64_t{1} << 40);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/offsets"}, {}, 2);
}

TEST_F(CliBadInput, TwoRanksUnknownMethod) {
    const auto good = write_chain("good.h5", six_state_dtmc());
    expect_refused(solve_args(good, {"--method", "fastest"}), good, code(ExitCode::usage),
                   {"--method", "fastest"}, 2, {}, false);
}

TEST_F(CliBadInput, TwoRanksToleranceThatCannotBeMet) {
    const auto good = write_chain("awkward.h5", awkward_dtmc());
    expect_solve_refused(good, code(ExitCode::numerical), {"1.0e-30"}, {"--tol", "1e-30"}, 2);
}

} // namespace

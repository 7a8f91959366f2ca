// What a user sees when `longrun` is handed something wrong. A batch script can
// only go by the exit code and the log, so every refusal must be exactly one
// line that says which file (and which dataset and first row) is at fault, must
// leave no result and no half-written temporary file behind, and must never
// touch the input. Under mpirun every rank must agree and the job must end
// with the same code instead of hanging or aborting.
//
// Broken chain files are made with the io writer (which writes anything it is
// given) and, for what that writer cannot express, the raw HDF5 C API.
#include "cli_fixture.hpp"

#include "io/chain.hpp"
#include "io/error.hpp"

#include <fmt/format.h>
#include <gtest/gtest.h>
#include <hdf5.h>
#include <sys/socket.h>
#include <sys/stat.h>
#include <sys/un.h>
#include <unistd.h>

#include <cmath>
#include <cstdio>
#include <filesystem>
#include <limits>
#include <set>
#include <string>
#include <vector>

namespace fs = std::filesystem;
using longrun::ExitCode;
using longrun::io::Chain;
using longrun::io::ChainKind;
using namespace longrun::test;

namespace {

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

class CliBadInput : public CliFixture {};

// --- the file itself ------------------------------------------------------

TEST_F(CliBadInput, MissingFile) {
    expect_solve_refused(dir_ / "no-such-chain.h5", code(ExitCode::bad_input), {});
}

TEST_F(CliBadInput, UnreadableFile) {
    const auto bad = write_chain("locked.h5", six_state_dtmc());
    fs::permissions(bad, fs::perms::none);
    CommandOptions as_user;
    if (geteuid() == 0) { // root reads anything; nobody does not
        as_user.run_as = nobody;
        // ... but nobody must be able to write the output there: solve tries
        // that first, and this case is about the input.
        fs::permissions(dir_, fs::perms::others_write, fs::perm_options::add);
    }
    expect_solve_refused(bad, code(ExitCode::bad_input), {}, {}, 0, as_user);
    fs::permissions(dir_, fs::perms::others_write, fs::perm_options::remove);
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
    // Row 3 is off by 0.1, the loosest tolerance the option takes.
    expect_solved(bad, 6, {"--row-sum-tol", "0.1"});
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

// Every numeric option has a range; a value outside it is one sentence naming the
// option, the value as typed (never a 300-digit rendering of it) and the range.
struct OutOfRange {
    std::vector<std::string> args; // the verb and its arguments; CHAIN is the chain file
    std::string option, typed, range;
};

TEST_F(CliBadInput, NumericOptionsOutOfRange) {
    const auto good = write_chain("good.h5", six_state_dtmc());
    const std::string chain = good.string(), out = out_.string();
    const std::string huge = "1" + std::string(300, '0');
    const std::vector<OutOfRange> cases = {
        {{"solve", chain, "-o", out, "--row-sum-tol", "0"}, "--row-sum-tol", "0", "(0, 0.1]"},
        {{"solve", chain, "-o", out, "--row-sum-tol", "2"}, "--row-sum-tol", "2", "(0, 0.1]"},
        {{"solve", chain, "-o", out, "--row-sum-tol", "nan"}, "--row-sum-tol", "nan", "(0, 0.1]"},
        {{"solve", chain, "-o", out, "--row-sum-tol", "1e999"},
         "--row-sum-tol",
         "1e999",
         "(0, 0.1]"},
        {{"solve", chain, "-o", out, "--row-sum-tol", "0.01x"},
         "--row-sum-tol",
         "0.01x",
         "(0, 0.1]"},
        {{"solve", chain, "-o", out, "--checkpoint-every", "-1"},
         "--checkpoint-every",
         "-1",
         "[0, 10000000]"},
        {{"solve", chain, "-o", out, "--truncation-warn", "0"}, "--truncation-warn", "0", "(0, 1]"},
        {{"solve", chain, "-o", out, "--per-class", "--from", "-1"}, "--from", "-1", ">= 0"},
        {{"check", chain, "--row-sum-tol", "-1e-9"}, "--row-sum-tol", "-1e-9", "(0, 0.1]"},
        {{"convert", chain, out, "--deflate", "10"}, "--deflate", "10", "[0, 9]"},
        {{"convert", chain, out, "--chunk", "1e3"}, "--chunk", "1e3", "[0, 536870911]"},
        {{"compare", chain, "--timing-products", "0"}, "--timing-products", "0", "[1, 100000]"},
        {{"compare", chain, "--max-seconds", "inf"}, "--max-seconds", "inf", "[0, 10000000]"},
        {{"summarize", chain, "--top", "100001"}, "--top", "100001", "[0, 100000]"},
        {{"simulate", chain, "--time", "0"}, "--time", "0", "> 0"},
        {{"simulate", chain, "--steps", "0"}, "--steps", "0", ">= 1"},
        {{"simulate", chain, "--steps", "10", "--replications", "0"},
         "--replications",
         "0",
         "[1, 100000]"},
        {{"simulate", chain, "--steps", "10", "--seed", "-3"}, "--seed", "-3", ">= 0"},
        {{"simulate", chain, "--steps", "10", "--warmup", "-1"}, "--warmup", "-1", ">= 0"},
        {{"simulate", chain, "--steps", "10", "--confidence", "1"}, "--confidence", "1", "(0, 1)"},
        {{"sweep", chain, "--vary", "a=1,2", "-o", out, "--only", "-1"},
         "--only",
         "-1",
         "[0, 99999]"},
        {{"sweep", chain, "--vary", "a=1,2", "-o", out, "--max-states", "0"},
         "--max-states",
         "0",
         ">= 1"},
        {{"generate", chain, "-o", out, "--max-states", "0"}, "--max-states", "0", ">= 1"},
    };
    for (const auto& c : cases) {
        SCOPED_TRACE(c.option + " " + c.typed);
        const CommandResult r = expect_refused(c.args, good, code(ExitCode::usage),
                                               {c.option, c.typed, c.range}, 0, {}, false);
        EXPECT_NE(r.err.find(c.option + ": " + c.typed + " is not a"), std::string::npos)
            << r.describe();
    }
    // A value of 301 digits is echoed shortened, not spelled out.
    const CommandResult r =
        expect_refused({"solve", chain, "-o", out, "--row-sum-tol", huge}, good,
                       code(ExitCode::usage), {"--row-sum-tol", "(0, 0.1]", "..."}, 0, {}, false);
    EXPECT_EQ(r.err.find(huge), std::string::npos) << r.describe();
    EXPECT_LT(r.err.size(), 200u) << r.describe();
}

TEST_F(CliBadInput, NumericOptionsAtTheirBoundsAreAccepted) {
    const auto good = write_chain("good.h5", six_state_dtmc());
    expect_solved(good, 6,
                  {"--row-sum-tol", "0.1", "--truncation-warn", "1", "--checkpoint-every", "0"});
}

// --- outputs: nothing is replaced but a regular file ------------------------

class CliOutputs : public CliFixture {
  protected:
    // `args` refused before any work: exit 1, one line naming `output` and
    // `what` is there; the folder unchanged.
    void expect_output_refused(const std::vector<std::string>& args, const fs::path& chain,
                               const std::string& output, const std::string& what, int ranks = 0) {
        const CommandResult r = expect_refused(args, chain, code(ExitCode::usage),
                                               {output, what, "regular"}, ranks, {}, false);
        // Refused before the solve: no progress, nothing read.
        EXPECT_EQ(r.err.find("iteration"), std::string::npos) << r.describe();
    }
    fs::path make_fifo(const std::string& name) {
        const auto p = dir_ / name;
        EXPECT_EQ(::mkfifo(p.c_str(), 0600), 0);
        return p;
    }
    // A bound UNIX socket; its file stays until the test's folder goes.
    fs::path make_socket(const std::string& name) {
        const auto p = dir_ / name;
        const int s = ::socket(AF_UNIX, SOCK_STREAM, 0);
        sockaddr_un address{};
        address.sun_family = AF_UNIX;
        std::snprintf(address.sun_path, sizeof address.sun_path, "%s", p.c_str());
        EXPECT_EQ(::bind(s, reinterpret_cast<sockaddr*>(&address), sizeof address), 0);
        ::close(s);
        return p;
    }
};

TEST_F(CliOutputs, SolveNeverWritesOverADevice) {
    const auto good = write_chain("good.h5", six_state_dtmc());
    for (const char* device : {"/dev/null", "/dev/full"}) {
        struct stat before {};
        ASSERT_EQ(::stat(device, &before), 0);
        expect_output_refused({"solve", good.string(), "-o", device, "-q"}, good, device,
                              "a device");
        struct stat after {};
        ASSERT_EQ(::stat(device, &after), 0);
        EXPECT_TRUE(S_ISCHR(after.st_mode)) << device << " is no longer a device";
        EXPECT_EQ(after.st_rdev, before.st_rdev);
        EXPECT_EQ(after.st_ino, before.st_ino) << device << " was replaced";
    }
}

TEST_F(CliOutputs, SolveRefusesAFolderBeforeSolving) {
    const auto good = write_chain("good.h5", six_state_dtmc());
    expect_output_refused({"solve", good.string(), "-o", dir_.string(), "-q"}, good, dir_.string(),
                          "a folder");
    // "-o ." from inside the folder.
    CommandOptions inside;
    inside.working_directory = dir_.string();
    const auto before = listing(dir_);
    const CommandResult r =
        run_command(command({"solve", good.string(), "-o", ".", "-q"}, 0), inside);
    EXPECT_EQ(r.exit_code, code(ExitCode::usage)) << r.describe();
    EXPECT_EQ(lines_of(r.err).size(), 1u) << r.describe();
    EXPECT_NE(r.err.find("'.' exists and is a folder"), std::string::npos) << r.describe();
    EXPECT_EQ(listing(dir_), before);
}

TEST_F(CliOutputs, SolveRefusesAFifoASocketAndALinkToADevice) {
    const auto good = write_chain("good.h5", six_state_dtmc());
    const auto fifo = make_fifo("fifo.h5");
    expect_output_refused({"solve", good.string(), "-o", fifo.string(), "-q"}, good, fifo.string(),
                          "a named pipe (fifo)");
    EXPECT_TRUE(fs::is_fifo(fifo));
    const auto socket = make_socket("socket.h5");
    expect_output_refused({"solve", good.string(), "-o", socket.string(), "-q"}, good,
                          socket.string(), "a socket");
    EXPECT_TRUE(fs::is_socket(socket));
    const auto link = dir_ / "null.h5";
    fs::create_symlink("/dev/null", link);
    expect_output_refused({"solve", good.string(), "-o", link.string(), "-q"}, good, link.string(),
                          "a symbolic link to a device");
    EXPECT_TRUE(fs::is_symlink(link));
    expect_output_refused(
        {"solve", good.string(), "-o", out_.string(), "-q", "--checkpoint", fifo.string()}, good,
        fifo.string(), "a named pipe (fifo)");
    expect_output_refused(
        {"solve", good.string(), "-o", out_.string(), "-q", "--resume", fifo.string()}, good,
        fifo.string(), "a named pipe (fifo)");
}

TEST_F(CliOutputs, TwoRanksRefuseADeviceTogether) {
    const auto good = write_chain("good.h5", six_state_dtmc());
    expect_output_refused({"solve", good.string(), "-o", "/dev/null", "-q"}, good, "/dev/null",
                          "a device", 2);
}

TEST_F(CliOutputs, EveryVerbRefusesADevice) {
    const auto good = write_chain("good.h5", six_state_dtmc());
    const auto model = write_text("queue.yaml", "kind: ctmc\n");
    const auto folder = dir_ / "folder";
    fs::create_directory(folder);
    const std::string chain = good.string(), null = "/dev/null", dir = folder.string();
    expect_output_refused({"convert", chain, null}, good, null, "a device");
    expect_output_refused({"generate", model.string(), "-o", null, "--quiet"}, good, null,
                          "a device");
    expect_output_refused({"compare", chain, "--json", null, "-q"}, good, null, "a device");
    expect_output_refused({"compare", chain, "--csv", dir, "-q"}, good, dir, "a folder");
    expect_output_refused({"summarize", chain, "--report", null, "-q"}, good, null, "a device");
    expect_output_refused({"summarize", chain, "--json", dir, "-q"}, good, dir, "a folder");
    expect_output_refused({"summarize", chain, "--csv", null, "-q"}, good, null, "a device");
    expect_output_refused({"simulate", chain, "--steps", "10", "--json", null, "-q"}, good, null,
                          "a device");
    fs::create_directory(dir_ / "table.csv");
    expect_output_refused(
        {"sweep", model.string(), "--vary", "a=1,2", "-o", (dir_ / "table").string(), "-q"}, good,
        (dir_ / "table.csv").string(), "a folder");
    expect_output_refused({"sweep", "--gather", (dir_ / "table").string(), "-q"}, good,
                          (dir_ / "table.csv").string(), "a folder");
}

TEST_F(CliOutputs, ALinkToARegularFileIsWrittenThrough) {
    const auto good = write_chain("good.h5", six_state_dtmc());
    const auto target = write_text("target.h5", "an old result\n");
    fs::create_symlink(target, out_);
    const CommandResult r = run_command(command(solve_args(good, {}), 0));
    EXPECT_EQ(r.exit_code, 0) << r.describe();
    EXPECT_TRUE(fs::is_symlink(out_)) << "the link was replaced";
    EXPECT_GT(H5Fis_hdf5(target.c_str()), 0) << "the result did not go to the link's target";
}

// Ranks need not see the same files: on a cluster each node has its own scratch,
// and a relative path means something else on ranks started in other folders.
// Here the two ranks of one job start in two folders (mpirun's -wdir per
// program), and only one of them has the folder `out/`, or the options file. The
// rank that refuses must not leave the other waiting in a collective call: the
// job ends with exit 1 and one line, whichever rank saw the problem. (The
// timeout only ends a hung job; it is not a measurement.)
TEST_F(CliOutputs, TwoRanksThatSeeDifferentFoldersAgree) {
    const auto good = write_chain("good.h5", six_state_dtmc());
    for (int lacking : {0, 1}) {
        SCOPED_TRACE("rank " + std::to_string(lacking) + " lacks out/ and opts.txt");
        const fs::path node[2] = {dir_ / ("node0-" + std::to_string(lacking)),
                                  dir_ / ("node1-" + std::to_string(lacking))};
        for (int r : {0, 1}) {
            fs::create_directory(node[r]);
            if (r != lacking) {
                fs::create_directory(node[r] / "out");
                std::ofstream(node[r] / "opts.txt") << "-linear_ksp_type gmres\n";
            }
        }
        for (const auto& extra :
             {std::vector<std::string>{}, std::vector<std::string>{"--options-file", "opts.txt"}}) {
            std::vector<std::string> argv{mpirun, "-q", "--oversubscribe"};
            for (int r : {0, 1}) {
                if (r == 1)
                    argv.push_back(":");
                argv.insert(argv.end(), {"-n", "1", "-wdir", node[r].string(), binary_});
                if (!extra.empty())
                    argv.insert(argv.end(), extra.begin(), extra.end());
                argv.insert(argv.end(), {"solve", good.string(), "-o", "out/OUT.h5", "-q"});
            }
            CommandOptions options;
            options.timeout = std::chrono::seconds(60);
            const CommandResult r = run_command(argv, options);
            EXPECT_FALSE(r.timed_out) << "a rank was left waiting\n" << r.describe();
            EXPECT_EQ(r.exit_code, code(ExitCode::usage)) << r.describe();
            const auto lines = lines_of(r.err);
            EXPECT_EQ(lines.size(), 1u) << r.describe();
            EXPECT_NE(r.err.find(extra.empty() ? "out/OUT.h5" : "opts.txt"), std::string::npos)
                << r.describe();
            EXPECT_EQ(r.err.find("(rank"), std::string::npos) << r.describe();
            EXPECT_FALSE(fs::exists(node[1 - lacking] / "out" / "OUT.h5"));
            EXPECT_TRUE(fs::is_empty(node[1 - lacking] / "out"));
        }
    }
}

TEST_F(CliBadInput, StartGivenAStateNumberPointsToFrom) {
    const auto good = write_chain("good.h5", six_state_dtmc());
    expect_refused(solve_args(good, {"--start", "3"}), good, code(ExitCode::usage), {"--from 3"}, 0,
                   {}, false);
}

TEST_F(CliBadInput, CheckpointIsTheInput) {
    const auto good = write_chain("good.h5", six_state_dtmc());
    expect_refused(solve_args(good, {"--checkpoint", good.string()}), good, code(ExitCode::usage),
                   {"input"});
}

TEST_F(CliBadInput, ResumeFromAnotherChainsCheckpoint) {
    const auto good = write_chain("good.h5", six_state_dtmc());
    const auto other = write_chain("awkward.h5", awkward_dtmc());
    const auto checkpoint = dir_ / "ck.h5";
    // A checkpoint of the awkward chain: an unreachable tolerance forces exit 4
    // after the best iterate has been checkpointed.
    const CommandResult first = run_command(command(
        {"solve", other.string(), "-q", "--tol", "1e-30", "--checkpoint", checkpoint.string()}, 0));
    ASSERT_EQ(first.exit_code, code(ExitCode::numerical)) << first.describe();
    ASSERT_TRUE(fs::exists(checkpoint));
    expect_solve_refused(good, code(ExitCode::bad_input), {checkpoint.string(), "40 states"},
                         {"--resume", checkpoint.string()});
}

TEST_F(CliBadInput, ResultFileGivenToResume) {
    const auto good = write_chain("good.h5", six_state_dtmc());
    const auto earlier = dir_ / "earlier.h5";
    ASSERT_EQ(
        run_command(command({"solve", good.string(), "-q", "-o", earlier.string()}, 0)).exit_code,
        0);
    // The file at fault is the result, not the chain: the line names it and --start.
    expect_refused(solve_args(good, {"--resume", earlier.string()}), good,
                   code(ExitCode::bad_input), {earlier.string(), "--start"}, 0, {}, false);
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

// --- Matrix Market read the wrong way round ---------------------------------

struct MatrixEntry {
    int row, column; // 1-based, as in the file
    double value;
};

// The file of `entries`, or of their transpose (column j holds row j's entries).
std::string matrix_market(int n, const std::vector<MatrixEntry>& entries, bool transposed) {
    std::string text = "%%MatrixMarket matrix coordinate real general\n" + std::to_string(n) + " " +
                       std::to_string(n) + " " + std::to_string(entries.size()) + "\n";
    for (const auto& e : entries)
        text += transposed ? fmt::format("{} {} {}\n", e.column, e.row, e.value)
                           : fmt::format("{} {} {}\n", e.row, e.column, e.value);
    return text;
}

// M/M/1/3 with arrival rate 1 and service rate 2, as the generator Q with its
// diagonal. Stationary law p_k = (1 - r) r^k / (1 - r^4), r = 1/2, that is
// (8, 4, 2, 1) / 15 (Kleinrock, Queueing Systems I, 1975, sec. 3.6).
const std::vector<MatrixEntry> mm13 = {{1, 1, -1}, {1, 2, 1},  {2, 1, 2}, {2, 2, -3}, {2, 3, 1},
                                       {3, 2, 2},  {3, 3, -3}, {3, 4, 1}, {4, 3, 2},  {4, 4, -2}};
const std::vector<double> mm13_law = {8.0 / 15, 4.0 / 15, 2.0 / 15, 1.0 / 15};

// A birth-death dtmc on 0..2: P = [[1/2, 1/2, 0], [1/4, 1/2, 1/4], [0, 1/2, 1/2]].
// Detailed balance, pi_k p(k, k+1) = pi_(k+1) p(k+1, k), gives (1, 2, 1) / 4
// (Kelly, Reversibility and Stochastic Networks, 1979, ch. 1).
const std::vector<MatrixEntry> lazy_walk = {{1, 1, 0.5},  {1, 2, 0.5}, {2, 1, 0.25}, {2, 2, 0.5},
                                            {2, 3, 0.25}, {3, 2, 0.5}, {3, 3, 0.5}};
const std::vector<double> lazy_walk_law = {0.25, 0.5, 0.25};

class CliTransposed : public CliFixture {
  protected:
    std::vector<std::string> compare_args(const fs::path& in,
                                          const std::vector<std::string>& extra) const {
        std::vector<std::string> args{"compare", in.string(), "--methods", "gth", "-q"};
        args.insert(args.end(), extra.begin(), extra.end());
        return args;
    }

    // convert IN --kind KIND --transposed, then solve: the law must be `law`.
    void expect_read_transposed(const fs::path& in, const std::string& kind,
                                const std::vector<double>& law) {
        const auto chain = dir_ / "chain.h5";
        const auto converted = run_command(
            command({"convert", in.string(), chain.string(), "--kind", kind, "--transposed"}, 0));
        ASSERT_EQ(converted.exit_code, 0) << converted.describe();
        const auto pi = expect_solved(chain, law.size(), {"--method", "gth"});
        ASSERT_EQ(pi.size(), law.size());
        for (std::size_t k = 0; k < law.size(); ++k)
            EXPECT_NEAR(pi[k], law[k], 1e-13) << "state " << k;
    }

    // compare IN --transposed: accepted, the kind told from the columns.
    void expect_compared_transposed(const fs::path& in, const std::string& kind) {
        const auto r = run_command(command(compare_args(in, {"--transposed", "--json", "-"}), 0));
        EXPECT_EQ(r.exit_code, 0) << r.describe();
        for (const auto* word : {"\"transposed\": true", "\"kind_detected\": true", "converged"})
            EXPECT_NE(r.out.find(word), std::string::npos) << word << "\n" << r.describe();
        EXPECT_NE(r.out.find("\"kind\": \"" + kind + "\""), std::string::npos) << r.describe();
    }
};

TEST_F(CliTransposed, GeneratorStoredAsQTransposedIsRefused) {
    const auto in = write_text("mm13t.mtx", matrix_market(4, mm13, true));
    const std::vector<std::string> row_and_sums = {"row 1 ", "diagonal -1", "sum to 2",
                                                   "--transposed"};
    expect_refused({"convert", in.string(), out_.string(), "--kind", "ctmc"}, in,
                   code(ExitCode::bad_input), row_and_sums);
    expect_refused(compare_args(in, {"--kind", "ctmc"}), in, code(ExitCode::bad_input),
                   row_and_sums);
    // Without --kind, compare tells the kind from the file: the columns fit.
    expect_refused(compare_args(in, {}), in, code(ExitCode::bad_input),
                   {"row 1 ", "Q^T", "--transposed"});
}

TEST_F(CliTransposed, GeneratorStoredAsQTransposedReadWithTransposed) {
    const auto in = write_text("mm13t.mtx", matrix_market(4, mm13, true));
    expect_read_transposed(in, "ctmc", mm13_law);
    expect_compared_transposed(in, "ctmc");
}

// --renormalize would otherwise rescale P^T's rows into another chain.
TEST_F(CliTransposed, TransitionMatrixStoredAsPTransposedIsRefused) {
    const auto in = write_text("walkt.mtx", matrix_market(3, lazy_walk, true));
    const std::vector<std::string> row_and_sums = {"row 1 ", "sum to 0.75", "column 1 sums to 1",
                                                   "--transposed"};
    for (const auto* renormalize : {"--row-sum-tol=1e-8", "--renormalize"})
        expect_refused({"convert", in.string(), out_.string(), "--kind", "dtmc", renormalize}, in,
                       code(ExitCode::bad_input), row_and_sums);
    expect_refused(compare_args(in, {}), in, code(ExitCode::bad_input),
                   {"row 1 ", "P^T", "--transposed"});
}

TEST_F(CliTransposed, TransitionMatrixStoredAsPTransposedReadWithTransposed) {
    const auto in = write_text("walkt.mtx", matrix_market(3, lazy_walk, true));
    expect_read_transposed(in, "dtmc", lazy_walk_law);
    expect_compared_transposed(in, "dtmc");
}

// Row 2's diagonal is -5 against rates 2 + 1, and no column balances either:
// --transposed would not help, and is not offered.
TEST_F(CliTransposed, WrongDiagonalIsRefusedWithoutOfferingTransposed) {
    auto entries = mm13;
    entries[3].value = -5;
    const auto in = write_text("wrong.mtx", matrix_market(4, entries, false));
    for (const auto& args :
         {std::vector<std::string>{"convert", in.string(), out_.string(), "--kind", "ctmc"},
          compare_args(in, {"--kind", "ctmc"}), compare_args(in, {})}) {
        const auto r = expect_refused(args, in, code(ExitCode::bad_input),
                                      {"row 2 ", "diagonal -5", "sum to 3"});
        EXPECT_EQ(r.err.find("--transposed"), std::string::npos) << r.describe();
    }
}

TEST_F(CliTransposed, TransposedIsOnlyForMatrixMarketInput) {
    const auto chain = write_chain("six.h5", six_state_dtmc());
    expect_refused({"convert", chain.string(), out_.string(), "--transposed"}, chain,
                   code(ExitCode::usage), {"--transposed", "Matrix Market"}, 0, {}, false);
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

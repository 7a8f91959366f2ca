// Hostile and malformed inputs, beyond the everyday mistakes of
// test_cli_bad_input.cpp: files cut short or zeroed, element types and shapes
// HDF5 will happily convert, headers that claim 2^40 states or transitions over
// a few bytes of data, signed datasets with negative values, extreme weights,
// degenerate chains, and Matrix Market files that are not what they say. Each
// refused case gets the same checks as every refusal (one line, exit code, no
// output, no temporary file, input unchanged); each accepted one must solve.
//
// Denormal weights are numbers like any other, so a chain that carries them is
// valid input: with ordinary weights beside them it must be certified (exit
// 0). A ctmc whose rates are all denormal cannot be uniformised (1 / largest
// rate overflows); it ends cleanly with exit 4, which README documents.
#include "cli_fixture.hpp"

#include "io/chain.hpp"
#include "io/error.hpp"

#include <gtest/gtest.h>
#include <hdf5.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <filesystem>
#include <limits>
#include <random>
#include <string>
#include <vector>

namespace fs = std::filesystem;
using longrun::ExitCode;
using longrun::io::Chain;
using longrun::io::ChainKind;
using longrun::io::StateVariable;
using namespace longrun::test;

namespace {

constexpr std::uint64_t two_to_40 = std::uint64_t{1} << 40;

// A valid run needs a few hundred MiB of address space; anything sized by a
// claimed 2^40 needs terabytes, so an allocation made before the claim was
// checked ends the child instead of passing quietly.
CommandOptions small_memory() {
    CommandOptions o;
#ifndef LONGRUN_TEST_NO_ADDRESS_LIMIT
    o.address_space_limit = std::uint64_t{2} << 30;
#endif
    return o;
}

Chain with_events() {
    Chain c = six_state_dtmc();
    for (std::size_t k = 0; k < c.targets.size(); ++k)
        c.events.push_back(static_cast<std::uint16_t>(k % 2));
    c.event_names = {"arrive", "leave"};
    return c;
}

Chain with_state_variable(bool integral) {
    Chain c = six_state_dtmc();
    c.variables.push_back(StateVariable{"q", integral, {0, 1, 2, 3, 4, 5}, 0.0, 5.0});
    return c;
}

std::string random_bytes(std::size_t n, bool newlines) {
    std::mt19937 gen(20240611);
    std::string s(n, '\0');
    for (auto& ch : s) {
        do
            ch = static_cast<char>(gen() & 0xff);
        while (!newlines && ch == '\n');
    }
    return s;
}

const std::string banner = "%%MatrixMarket matrix coordinate real general\n";
// Three states, rows summing to 1; row 2 is the one the cases break.
const std::string mtx_entries = "1 2 1.0\n2 1 0.5\n2 3 0.5\n3 1 1.0\n";

class CliHostile : public CliFixture {
  protected:
    // The distribution of the file as the io writer makes it, to compare a
    // variant that stores the same numbers differently against.
    std::vector<double> reference(const Chain& c, std::uint64_t states) {
        const auto file = write_chain("reference.h5", c);
        auto pi = expect_solved(file, states, {});
        fs::remove(out_);
        fs::remove(file);
        return pi;
    }
    void expect_same(const std::vector<double>& pi, const std::vector<double>& expected) {
        ASSERT_EQ(pi.size(), expected.size());
        for (std::size_t i = 0; i < pi.size(); ++i)
            EXPECT_NEAR(pi[i], expected[i], 1e-12) << "state " << i;
    }
    CommandResult expect_convert_refused(const fs::path& input, const std::string& kind,
                                         const std::vector<std::string>& mentions,
                                         CommandOptions options = {}) {
        return expect_refused({"convert", input.string(), out_.string(), "--kind", kind}, input,
                              code(ExitCode::bad_input), mentions, 0, options);
    }
};

// --- cut short or damaged ---------------------------------------------------

TEST_F(CliHostile, ZeroByteChainFile) {
    const auto bad = write_text("empty.h5", "");
    expect_solve_refused(bad, code(ExitCode::bad_input), {"HDF5"});
}

TEST_F(CliHostile, CutInsideTheSuperblock) {
    const auto bad = write_chain("cut-40.h5", six_state_dtmc());
    fs::resize_file(bad, 40);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"HDF5"});
}

// Every object header is there, no element of any dataset is.
TEST_F(CliHostile, CutWhereTheDataBegins) {
    const auto bad = write_chain("cut-header.h5", six_state_dtmc());
    fs::resize_file(bad, data_address(bad, "/chain/offsets"));
    expect_solve_refused(bad, code(ExitCode::bad_input), {});
}

TEST_F(CliHostile, CutInsideAnElementOfTargets) {
    const auto bad = write_chain("cut-targets.h5", six_state_dtmc());
    fs::resize_file(bad, data_address(bad, "/chain/targets") + 8 * row3 + 3);
    expect_solve_refused(bad, code(ExitCode::bad_input), {});
}

TEST_F(CliHostile, LastByteMissing) {
    const auto bad = write_chain("cut-1.h5", six_state_dtmc());
    fs::resize_file(bad, fs::file_size(bad) - 1);
    expect_solve_refused(bad, code(ExitCode::bad_input), {});
}

// A copy that stopped half way on a file system that had already reserved the
// space: the right length, zeros where the second half was.
TEST_F(CliHostile, SecondHalfZeroed) {
    const auto bad = write_chain("zeroed.h5", six_state_dtmc());
    const auto n = fs::file_size(bad);
    std::string bytes = read_bytes(bad);
    std::fill(bytes.begin() + static_cast<std::ptrdiff_t>(n / 2), bytes.end(), '\0');
    write_text("zeroed.h5", bytes);
    expect_solve_refused(bad, code(ExitCode::bad_input), {});
}

// --- element types ----------------------------------------------------------

TEST_F(CliHostile, TargetsStoredAsFloat) {
    const auto c = six_state_dtmc();
    const auto bad = write_chain("float-targets.h5", c);
    const std::vector<double> t(c.targets.begin(), c.targets.end());
    RawFile(bad).replace("/chain/targets", H5T_NATIVE_DOUBLE, {t.size()}, t.data());
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/targets", "type"});
}

TEST_F(CliHostile, OffsetsStoredAsFloat) {
    const auto c = six_state_dtmc();
    const auto bad = write_chain("float-offsets.h5", c);
    const std::vector<float> o(c.offsets.begin(), c.offsets.end());
    RawFile(bad).replace("/chain/offsets", H5T_NATIVE_FLOAT, {o.size()}, o.data());
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/offsets", "type"});
}

TEST_F(CliHostile, WeightsStoredAsInt8) {
    const auto bad = write_chain("int8-weights.h5", six_state_dtmc());
    const std::vector<std::int8_t> w(18, 1);
    RawFile(bad).replace("/chain/weights", H5T_NATIVE_INT8, {w.size()}, w.data());
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/weights", "type"});
}

// Half precision is floating point, and HDF5 widens it exactly: such weights
// are accepted (1/4 and 1/2 are exact in 16 bits, so the rows still sum to 1).
TEST_F(CliHostile, WeightsStoredAsHalfPrecisionAreAccepted) {
    const auto c = six_state_dtmc();
    const auto expected = reference(c, 6);
    const auto file = write_chain("half-weights.h5", c);
    const hid_t half = H5Tcopy(H5T_IEEE_F32LE);
    ASSERT_GE(H5Tset_fields(half, 15, 10, 5, 0, 10), 0);
    ASSERT_GE(H5Tset_precision(half, 16), 0);
    ASSERT_GE(H5Tset_size(half, 2), 0);
    ASSERT_GE(H5Tset_ebias(half, 15), 0);
    RawFile(file).replace("/chain/weights", half, {c.weights.size()}, c.weights.data(),
                          H5T_NATIVE_DOUBLE);
    H5Tclose(half);
    expect_same(expect_solved(file, 6, {}), expected);
}

TEST_F(CliHostile, WeightsStoredAsCompound) {
    struct Pair {
        double value, spare;
    };
    const auto c = six_state_dtmc();
    const auto bad = write_chain("compound-weights.h5", c);
    std::vector<Pair> w;
    for (double x : c.weights)
        w.push_back({x, 0});
    const hid_t type = H5Tcreate(H5T_COMPOUND, sizeof(Pair));
    H5Tinsert(type, "value", HOFFSET(Pair, value), H5T_NATIVE_DOUBLE);
    H5Tinsert(type, "spare", HOFFSET(Pair, spare), H5T_NATIVE_DOUBLE);
    RawFile(bad).replace("/chain/weights", type, {w.size()}, w.data());
    H5Tclose(type);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/weights", "type"});
}

TEST_F(CliHostile, EventsStoredAsFloat) {
    const auto c = with_events();
    const auto bad = write_chain("float-events.h5", c);
    const std::vector<double> e(c.events.begin(), c.events.end());
    RawFile(bad).replace("/chain/events", H5T_NATIVE_DOUBLE, {e.size()}, e.data());
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/events", "type"});
}

// --- shapes -----------------------------------------------------------------

TEST_F(CliHostile, TwoDimensionalTargets) {
    const auto c = six_state_dtmc();
    const auto bad = write_chain("targets-2d.h5", c);
    RawFile(bad).replace("/chain/targets", H5T_NATIVE_UINT64, {6, 3}, c.targets.data());
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/targets", "dimensions"});
}

TEST_F(CliHostile, ScalarWeightsDataset) {
    const auto bad = write_chain("scalar-weights.h5", six_state_dtmc());
    const double one = 1.0;
    RawFile(bad).replace("/chain/weights", H5T_NATIVE_DOUBLE, {}, &one);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/weights", "dimensions"});
}

// --- sizes that are claimed, not stored ------------------------------------

TEST_F(CliHostile, TransitionsAttributeClaimsTwoTo40) {
    const auto bad = write_chain("huge-transitions.h5", six_state_dtmc());
    RawFile(bad).set_u64("/chain", "transitions", two_to_40);
    const auto r =
        expect_solve_refused(bad, code(ExitCode::bad_input),
                             {"/chain/targets", std::to_string(two_to_40)}, {}, 0, small_memory());
}

// A chunked dataset of 2^40 + 1 elements with one chunk written is a file of a
// few KiB whose lengths all agree with the header: only the storage tells.
TEST_F(CliHostile, OffsetsClaimTwoTo40StatesButHoldOneChunk) {
    const auto c = six_state_dtmc();
    const auto bad = write_chain("sparse-offsets.h5", c);
    {
        RawFile raw(bad);
        raw.set_u64("/chain", "states", two_to_40);
        raw.replace_sparse("/chain/offsets", H5T_NATIVE_UINT64, two_to_40 + 1, 1024,
                           c.offsets.data(), c.offsets.size());
    }
    ASSERT_LT(fs::file_size(bad), 1u << 20);
    const auto r = expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/offsets"}, {}, 0,
                                        small_memory());
}

TEST_F(CliHostile, TwoRanksOffsetsClaimTwoTo40StatesButHoldOneChunk) {
    const auto c = six_state_dtmc();
    const auto bad = write_chain("sparse-offsets.h5", c);
    {
        RawFile raw(bad);
        raw.set_u64("/chain", "states", two_to_40);
        raw.replace_sparse("/chain/offsets", H5T_NATIVE_UINT64, two_to_40 + 1, 1024,
                           c.offsets.data(), c.offsets.size());
    }
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/offsets"}, {}, 2);
}

TEST_F(CliHostile, TargetsAndWeightsClaimTwoTo40ButHoldOneChunk) {
    auto c = six_state_dtmc();
    const auto bad = write_chain("sparse-targets.h5", c);
    c.offsets.back() = two_to_40; // the last row claims nearly all of them
    {
        RawFile raw(bad);
        raw.set_u64("/chain", "transitions", two_to_40);
        raw.replace("/chain/offsets", H5T_NATIVE_UINT64, {c.offsets.size()}, c.offsets.data());
        raw.replace_sparse("/chain/targets", H5T_NATIVE_UINT64, two_to_40, 1024, c.targets.data(),
                           c.targets.size());
        raw.replace_sparse("/chain/weights", H5T_NATIVE_DOUBLE, two_to_40, 1024, c.weights.data(),
                           c.weights.size());
    }
    ASSERT_LT(fs::file_size(bad), 1u << 20);
    const auto r = expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/targets"}, {}, 0,
                                        small_memory());
}

// Created, never written: a contiguous dataset with no storage behind it.
TEST_F(CliHostile, WeightsDatasetNeverWritten) {
    const auto bad = write_chain("unwritten.h5", six_state_dtmc());
    RawFile(bad).replace_unwritten("/chain/weights", H5T_NATIVE_DOUBLE, 18);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/weights", "never written"});
}

// --- offsets that overflow or wrap -------------------------------------------

TEST_F(CliHostile, OffsetNearTwoTo64) {
    auto c = six_state_dtmc();
    c.offsets[4] = std::numeric_limits<std::uint64_t>::max() - 1; // end of row 3
    const auto bad = write_chain("offset-2-64.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input),
                         {"/chain/offsets", "row 3", std::to_string(c.offsets[4])});
}

// Row 4 claims 2^64 - 3 transitions: modulo 2^64 its end (9) lies before its
// start (12), and the row lengths, summed in unsigned arithmetic, still add up
// to the 18 transitions. Split over two ranks so that the row-balancing
// partition sees the garbage before validation does.
TEST_F(CliHostile, TwoRanksOffsetsThatWrap) {
    auto c = six_state_dtmc();
    c.offsets[5] = c.offsets[4] + std::numeric_limits<std::uint64_t>::max() - 2; // 9
    const auto bad = write_chain("offset-wrap.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/offsets", "row 4"}, {}, 2);
}

// --- signed datasets: HDF5 turns a negative value into 0 when it is read as
// unsigned, which would make a -1 target a valid state 0 -------------------------

TEST_F(CliHostile, SignedOffsetsWithNegativeValue) {
    const auto c = six_state_dtmc();
    const auto bad = write_chain("signed-offsets.h5", c);
    std::vector<std::int64_t> o(c.offsets.begin(), c.offsets.end());
    o[0] = -1; // would pass as 0
    RawFile(bad).replace("/chain/offsets", H5T_NATIVE_INT64, {o.size()}, o.data());
    expect_solve_refused(bad, code(ExitCode::bad_input),
                         {"/chain/offsets", "row 0", "-1", "negative"});
}

TEST_F(CliHostile, SignedTargetsWithNegativeValue) {
    const auto c = six_state_dtmc();
    const auto bad = write_chain("signed-targets.h5", c);
    std::vector<std::int64_t> t(c.targets.begin(), c.targets.end());
    t[row3] = -1; // would pass as 0: {0, 4, 5} is a valid row
    RawFile(bad).replace("/chain/targets", H5T_NATIVE_INT64, {t.size()}, t.data());
    expect_solve_refused(bad, code(ExitCode::bad_input),
                         {"/chain/targets", "row 3", "-1", "negative"});
}

TEST_F(CliHostile, SignedEventsWithNegativeValue) {
    const auto c = with_events();
    const auto bad = write_chain("signed-events.h5", c);
    std::vector<std::int16_t> e(c.events.begin(), c.events.end());
    e[row3 + 1] = -1; // would pass as event 0
    RawFile(bad).replace("/chain/events", H5T_NATIVE_INT16, {e.size()}, e.data());
    expect_solve_refused(bad, code(ExitCode::bad_input),
                         {"/chain/events", "row 3", "-1", "negative"});
}

// 65536 does not fit the 16-bit labels: HDF5 would clamp it to 65535.
TEST_F(CliHostile, EventIndexBeyondSixteenBits) {
    const auto c = with_events();
    const auto bad = write_chain("wide-events.h5", c);
    std::vector<std::uint32_t> e(c.events.begin(), c.events.end());
    e[row3 + 2] = 65536;
    RawFile(bad).replace("/chain/events", H5T_NATIVE_UINT32, {e.size()}, e.data());
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/events", "row 3", "65536"});
}

// The same file with every signed value >= 0 is a valid chain: numpy's default
// integers are signed, and a file written with them must keep working.
TEST_F(CliHostile, SignedDatasetsWithoutNegativeValuesAreAccepted) {
    const auto c = with_events();
    const auto expected = reference(c, 6);
    const auto file = write_chain("signed-ok.h5", c);
    {
        RawFile raw(file);
        const std::vector<std::int64_t> o(c.offsets.begin(), c.offsets.end());
        const std::vector<std::int64_t> t(c.targets.begin(), c.targets.end());
        const std::vector<std::int32_t> e(c.events.begin(), c.events.end());
        raw.replace("/chain/offsets", H5T_NATIVE_INT64, {o.size()}, o.data());
        raw.replace("/chain/targets", H5T_NATIVE_INT64, {t.size()}, t.data());
        raw.replace("/chain/events", H5T_NATIVE_INT32, {e.size()}, e.data());
    }
    expect_same(expect_solved(file, 6, {}), expected);
}

TEST_F(CliHostile, ConvertRefusesSignedTargetsWithNegativeValue) {
    const auto c = six_state_dtmc();
    const auto bad = write_chain("signed-targets.h5", c);
    std::vector<std::int64_t> t(c.targets.begin(), c.targets.end());
    t[row3] = -1;
    RawFile(bad).replace("/chain/targets", H5T_NATIVE_INT64, {t.size()}, t.data());
    expect_refused({"convert", bad.string(), (dir_ / "OUT.mtx").string()}, bad,
                   code(ExitCode::bad_input), {"/chain/targets", "row 3", "-1"});
}

// --- weights ----------------------------------------------------------------

TEST_F(CliHostile, DtmcRowSummingTo1Point1) {
    auto c = six_state_dtmc();
    c.weights[row3 + 1] = 0.6;
    const auto bad = write_chain("row-sum-1.1.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/weights", "row 3", "1.1"});
}

// Found by fuzz_chain_validate: the sum overflows, and rescaling by it turned
// the row into zeros, a dtmc state that leads nowhere, accepted.
TEST_F(CliHostile, DtmcRowSumOverflowsUnderRenormalize) {
    auto c = six_state_dtmc();
    c.weights[row3] = 1e308;
    c.weights[row3 + 1] = 1e308;
    const auto bad = write_chain("row-sum-overflow.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/weights", "row 3", "inf"},
                         {"--renormalize"});
}

// A rate at the bottom of the denormal range next to ordinary ones.
TEST_F(CliHostile, DenormalRateIsAcceptedAndCertified) {
    const double tiny = std::numeric_limits<double>::denorm_min();
    auto c = longrun::io::chain_from_triples(ChainKind::ctmc, 3, {0, 0, 1, 2}, {1, 2, 2, 0},
                                             {1.0, tiny, 1.0, 1.0});
    const auto file = write_chain("denormal-rate.h5", c);
    const auto pi = expect_solved(file, 3, {});
    for (double p : pi)
        EXPECT_NEAR(p, 1.0 / 3, 1e-12);
}

// Every rate denormal: the distribution is that of the same chain in another
// time unit (uniform here). GTH elimination is scale-free (it divides rates by
// rates), so auto, which tries it first on small chains, gets the exact answer.
// An iterative method cannot: 1 / (largest total rate) overflows and no finite
// iterate appears, so the file is valid (exit 2 would be wrong) and the run
// ends cleanly with exit 4, one line and nothing written.
TEST_F(CliHostile, AllRatesDenormalIsSolvedExactlyByElimination) {
    const double tiny = 1e-310;
    ASSERT_EQ(std::fpclassify(tiny), FP_SUBNORMAL);
    auto c = longrun::io::chain_from_triples(ChainKind::ctmc, 3, {0, 1, 2}, {1, 2, 0},
                                             {tiny, tiny, tiny});
    const auto file = write_chain("denormal-rates.h5", c);
    // A cycle with equal rates: uniform (common practice, by symmetry).
    for (double p : expect_solved(file, 3, {}))
        EXPECT_NEAR(p, 1.0 / 3, 1e-15);
}

TEST_F(CliHostile, AllRatesDenormalEndsWithoutCertificateForIterativeMethods) {
    const double tiny = 1e-310;
    auto c = longrun::io::chain_from_triples(ChainKind::ctmc, 3, {0, 1, 2}, {1, 2, 0},
                                             {tiny, tiny, tiny});
    const auto file = write_chain("denormal-rates.h5", c);
    expect_solve_refused(file, code(ExitCode::numerical), {"certificate"},
                         {"--method", "linear,eigen"});
}

// Each rate is finite, their total is not: the generator's diagonal of state 3
// would be -inf.
TEST_F(CliHostile, CtmcTotalRateOverflows) {
    auto c = six_state_dtmc();
    c.kind = ChainKind::ctmc;
    c.weights[row3] = 1e308;
    c.weights[row3 + 1] = 1e308;
    const auto bad = write_chain("rate-overflow.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/weights", "row 3"});
}

// 1 - denorm_min rounds to 1, so the row sums to 1 exactly; the second state's
// probability is itself denormal, and may come out as 0.
TEST_F(CliHostile, DenormalProbabilityIsAccepted) {
    const double tiny = std::numeric_limits<double>::denorm_min();
    auto c = longrun::io::chain_from_triples(ChainKind::dtmc, 2, {0, 0, 1}, {0, 1, 0},
                                             {1.0 - tiny, tiny, 1.0});
    const auto file = write_chain("denormal-probability.h5", c);
    const auto pi = expect_solved(file, 2, {}, false);
    ASSERT_EQ(pi.size(), 2u);
    EXPECT_DOUBLE_EQ(pi[0], 1.0);
    EXPECT_GE(pi[1], 0.0);
    EXPECT_LE(pi[1], 1e-300);
}

// --- degenerate chains --------------------------------------------------------

TEST_F(CliHostile, ChainWithNoStates) {
    Chain c;
    c.kind = ChainKind::ctmc;
    c.states = 0;
    c.rows = {0, 0};
    const auto bad = write_chain("no-states.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"no states"});
}

TEST_F(CliHostile, OneStateCtmcWithoutTransitions) {
    Chain c;
    c.kind = ChainKind::ctmc;
    c.states = 1;
    c.rows = {0, 1};
    c.offsets = {0, 0};
    const auto file = write_chain("one-state.h5", c);
    const auto pi = expect_solved(file, 1, {});
    ASSERT_EQ(pi.size(), 1u);
    EXPECT_EQ(pi[0], 1.0);
}

TEST_F(CliHostile, OneStateDtmcWithSelfLoop) {
    const auto c = longrun::io::chain_from_triples(ChainKind::dtmc, 1, {0}, {0}, {1.0});
    const auto file = write_chain("one-state-loop.h5", c);
    const auto pi = expect_solved(file, 1, {});
    ASSERT_EQ(pi.size(), 1u);
    EXPECT_EQ(pi[0], 1.0);
}

// A hub with 10^6 spokes: one row holds 10^6 transitions, one column 10^6
// more. Valid, and it must not take the slow path anywhere. Spoke s returns at
// rate 1 + s % 7, so that the answer is not the uniform start vector.
TEST_F(CliHostile, StateWithAMillionTransitions) {
    const std::uint64_t spokes = 1'000'000;
    auto back = [](std::uint64_t s) { return 1.0 + static_cast<double>(s % 7); };
    Chain c;
    c.kind = ChainKind::ctmc;
    c.states = spokes + 1;
    c.rows = {0, c.states};
    c.offsets.reserve(c.states + 1);
    c.offsets = {0, spokes};
    c.targets.reserve(2 * spokes);
    c.weights.reserve(2 * spokes);
    for (std::uint64_t s = 1; s <= spokes; ++s) {
        c.targets.push_back(s);
        c.weights.push_back(1.0);
    }
    for (std::uint64_t s = 1; s <= spokes; ++s) {
        c.targets.push_back(0);
        c.weights.push_back(back(s));
        c.offsets.push_back(c.targets.size());
    }
    c.transitions = c.targets.size();
    const auto file = write_chain("hub.h5", c);
    CommandResult run;
    // Speed is a benchmark's business; the run helper's kill timeout only guards
    // against a hang.
    const auto pi = expect_solved(file, c.states, {}, true, &run);
    if (pi.empty())
        return;
    // Balance across each spoke: pi_s * back(s) = pi_hub * 1.
    double sum = 1;
    for (std::uint64_t s = 1; s <= spokes; ++s)
        sum += 1 / back(s);
    double worst = std::abs(pi[0] * sum - 1);
    for (std::uint64_t s = 1; s <= spokes; ++s)
        worst = std::max(worst, std::abs(pi[s] * back(s) * sum - 1));
    EXPECT_LT(worst, 1e-6);
}

// A small hub whose spokes all return at rate 1: the start vector is so close
// to the answer that the solver stops before recording a single residual. The
// empty history must still go into the result file (it was refused as a write
// error, exit 6, on any number of ranks).
TEST_F(CliHostile, AnswerIsTheStartVector) {
    std::vector<std::uint64_t> s, t;
    std::vector<double> w;
    for (std::uint64_t spoke = 1; spoke <= 10; ++spoke) {
        s.insert(s.end(), {0, spoke});
        t.insert(t.end(), {spoke, 0});
        w.insert(w.end(), {1.0, 1.0});
    }
    const auto file =
        write_chain("star.h5", longrun::io::chain_from_triples(ChainKind::ctmc, 11, s, t, w));
    for (double p : expect_solved(file, 11, {}))
        EXPECT_NEAR(p, 1.0 / 11, 1e-12);
}

// --- events and state variables ---------------------------------------------

TEST_F(CliHostile, EventIndexWithoutName) {
    auto c = with_events();
    c.events[row3 + 1] = 2; // two names: 0 and 1
    const auto bad = write_chain("event-range.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/chain/events", "row 3", "2"});
}

TEST_F(CliHostile, EventNamesMissing) {
    const auto bad = write_chain("no-event-names.h5", with_events());
    RawFile(bad).remove_attribute("/chain", "event_names");
    expect_solve_refused(bad, code(ExitCode::bad_input), {"event_names", "missing"});
}

TEST_F(CliHostile, StateVariableOfWrongLength) {
    const auto bad = write_chain("states-short.h5", with_state_variable(true));
    const std::vector<std::int64_t> five{0, 1, 2, 3, 4};
    RawFile(bad).replace("/states/q", H5T_NATIVE_INT64, {five.size()}, five.data());
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/states/q", "5", "6"});
}

TEST_F(CliHostile, StateVariableNaN) {
    auto c = with_state_variable(false);
    c.variables[0].values[3] = std::numeric_limits<double>::quiet_NaN();
    const auto bad = write_chain("states-nan.h5", c);
    expect_solve_refused(bad, code(ExitCode::bad_input), {"/states/q", "row 3", "not finite"});
}

// --- Matrix Market ------------------------------------------------------------

TEST_F(CliHostile, MatrixMarketWithoutBanner) {
    const auto bad = write_text("no-banner.mtx", "3 3 4\n" + mtx_entries);
    expect_convert_refused(bad, "dtmc", {"line 1", "banner"});
}

TEST_F(CliHostile, MatrixMarketSizeLineNotNumbers) {
    const auto bad = write_text("size-words.mtx", banner + "three 3 4\n" + mtx_entries);
    expect_convert_refused(bad, "dtmc", {"line 2", "'three'"});
}

TEST_F(CliHostile, MatrixMarketFewerEntriesThanDeclared) {
    const auto bad = write_text("fewer.mtx", banner + "3 3 5\n" + mtx_entries);
    expect_convert_refused(bad, "dtmc", {"4 of the 5"});
}

TEST_F(CliHostile, MatrixMarketMoreEntriesThanDeclared) {
    const auto bad = write_text("more.mtx", banner + "3 3 3\n" + mtx_entries);
    expect_convert_refused(bad, "dtmc", {"line 6", "more entries"});
}

TEST_F(CliHostile, MatrixMarketZeroBasedIndices) {
    const auto bad =
        write_text("zero-based.mtx", banner + "3 3 4\n0 1 1.0\n1 0 0.5\n1 2 0.5\n2 0 1.0\n");
    expect_convert_refused(bad, "dtmc", {"line 3", "index 0", "1-based"});
}

TEST_F(CliHostile, MatrixMarketPatternField) {
    const auto bad = write_text("pattern.mtx", "%%MatrixMarket matrix coordinate pattern general\n"
                                               "3 3 4\n1 2\n2 1\n2 3\n3 1\n");
    expect_convert_refused(bad, "dtmc", {"line 1", "pattern"});
}

TEST_F(CliHostile, MatrixMarketEmptyFile) {
    const auto bad = write_text("empty.mtx", "");
    expect_convert_refused(bad, "ctmc", {"empty"});
}

TEST_F(CliHostile, MatrixMarketBinaryGarbage) {
    const auto bad = write_text("garbage.mtx", random_bytes(4096, true));
    expect_convert_refused(bad, "ctmc", {"line 1", "banner"});
}

// No newline at all: the reader must give up after a bounded line, not buffer
// the whole file looking for the end of line 1.
TEST_F(CliHostile, MatrixMarketBinaryGarbageWithoutNewlines) {
    const auto bad = write_text("garbage-long.mtx", random_bytes(std::size_t{3} << 20, false));
    expect_convert_refused(bad, "ctmc", {"line 1"}, small_memory());
}

TEST_F(CliHostile, MatrixMarketValidHeaderThenGarbage) {
    const auto bad =
        write_text("garbage-body.mtx", banner + "3 3 4\n" + random_bytes(512, false) + "\n");
    const auto r = expect_convert_refused(bad, "dtmc", {"line 3"});
    // The quoted bytes must not reach a log as broken UTF-8 or control codes.
    for (const unsigned char ch : r.err)
        EXPECT_TRUE(ch == '\n' || (ch >= 0x20 && ch < 0x7f))
            << "byte " << int(ch) << " in " << r.err;
}

TEST_F(CliHostile, MatrixMarketClaimsTwoTo40States) {
    const auto n = std::to_string(two_to_40);
    const auto bad = write_text("huge.mtx", banner + n + " " + n + " 4\n" + mtx_entries);
    expect_convert_refused(bad, "dtmc", {"line 2", n + " states"}, small_memory());
}

TEST_F(CliHostile, MatrixMarketClaimsTwoTo40Entries) {
    const auto n = std::to_string(two_to_40);
    const auto bad =
        write_text("huge-entries.mtx", banner + "1048576 1048576 " + n + "\n" + mtx_entries);
    expect_convert_refused(bad, "dtmc", {"4 of the " + n}, small_memory());
}

TEST_F(CliHostile, MatrixMarketNaN) {
    const auto bad = write_text("nan.mtx", banner + "3 3 4\n1 2 1.0\n2 1 NaN\n2 3 0.5\n3 1 1.0\n");
    expect_convert_refused(bad, "dtmc", {"line 4", "not finite"});
}

TEST_F(CliHostile, MatrixMarketInfinity) {
    const auto bad = write_text("inf.mtx", banner + "3 3 4\n1 2 1.0\n2 1 -inf\n2 3 0.5\n3 1 1.0\n");
    expect_convert_refused(bad, "ctmc", {"line 4", "not finite"});
}

TEST_F(CliHostile, MatrixMarketNegativeProbability) {
    const auto bad =
        write_text("negative.mtx", banner + "3 3 4\n1 2 1.0\n2 1 -0.5\n2 3 1.5\n3 1 1.0\n");
    expect_convert_refused(bad, "dtmc", {"line 4", "negative probability"});
}

TEST_F(CliHostile, MatrixMarketDuplicateEntry) {
    const auto bad =
        write_text("duplicate.mtx", banner + "3 3 4\n1 2 1.0\n2 1 0.5\n3 1 1.0\n2 1 0.5\n");
    expect_convert_refused(bad, "dtmc", {"line 6", "duplicate entry (2, 1)", "line 4"});
}

// Rows are numbered as in the file (from 1), not as the chain's states.
TEST_F(CliHostile, MatrixMarketRowSummingTo0Point9) {
    const auto bad =
        write_text("row-sum.mtx", banner + "3 3 4\n1 2 1.0\n2 1 0.5\n2 3 0.4\n3 1 1.0\n");
    expect_convert_refused(bad, "dtmc", {"row 2", "0.9"});
}

} // namespace

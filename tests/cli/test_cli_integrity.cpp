// A result is never paired with a chain other than the one solved, and damage
// to a file after it was written is never read as data, through the binary:
// - summarize, simulate --against, solve --start and solve --resume refuse a
//   chain whose content hash differs from the one recorded (exit 2, one line
//   naming both files and both hashes), and accept a chain that was only moved;
// - a result written before hashes were recorded is accepted with one note;
// - a bit flipped in a chain's /chain/weights, or in a result's /distribution,
//   fails the HDF5 checksum: exit 2 naming the file and the dataset, on 1 and 2
//   ranks, even where the damaged value would still be a valid probability.
#include "cli_fixture.hpp"

#include "io/chain.hpp"
#include "io/error.hpp"

#include <gtest/gtest.h>
#include <hdf5.h>

#include <filesystem>
#include <string>
#include <vector>

namespace fs = std::filesystem;
using longrun::ExitCode;
using longrun::io::Chain;
using longrun::io::ChainKind;
using namespace longrun::test;

namespace {

// six_state_dtmc with other probabilities: as many states and transitions.
Chain reweighted_six_state_dtmc() {
    Chain c = six_state_dtmc();
    for (std::size_t r = 0; r < 6; ++r) {
        c.weights[3 * r] = 0.5;
        c.weights[3 * r + 1] = 0.25;
        c.weights[3 * r + 2] = 0.25;
    }
    return c;
}

// 40 states, steps 1, 3 and 7 ahead: no iteration meets 1e-30, so a solve with
// that tolerance ends with exit 4 after checkpointing its best iterate. `order`
// permutes the three probabilities: another chain of the same shape.
Chain stepping_dtmc(bool permuted) {
    const std::uint64_t n = 40;
    std::vector<std::uint64_t> s, t;
    std::vector<double> w;
    const double p[3] = {1.0 / 3, 2.0 / 7, 8.0 / 21};
    const int steps[3] = {1, 3, 7};
    for (std::uint64_t r = 0; r < n; ++r)
        for (int i = 0; i < 3; ++i) {
            s.push_back(r);
            t.push_back((r + steps[i]) % n);
            w.push_back(p[permuted ? (i + 1) % 3 : i]);
        }
    return longrun::io::chain_from_triples(ChainKind::dtmc, n, s, t, w);
}

// The root attribute chain_hash of a result or checkpoint, as stored.
std::string recorded_hash(const fs::path& file) {
    const hid_t f = H5Fopen(file.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT);
    const hid_t a = H5Aopen(f, "chain_hash", H5P_DEFAULT);
    const hid_t type = H5Aget_type(a);
    std::string text;
    if (H5Tis_variable_str(type) > 0) {
        char* raw = nullptr;
        if (H5Aread(a, type, &raw) >= 0 && raw)
            text = raw;
        H5free_memory(raw);
    }
    H5Tclose(type);
    H5Aclose(a);
    H5Fclose(f);
    if (text.empty())
        throw std::runtime_error("no chain_hash in " + file.string());
    return text;
}

class CliIntegrity : public CliFixture {
  protected:
    // The chain's hash as `solve` records it (this test program does not start MPI).
    std::string hash_of(const fs::path& chain) {
        const fs::path probe = dir_ / "hash-probe.h5";
        const std::string hash = recorded_hash(solved(chain, probe.filename().string()));
        fs::remove(probe);
        return hash;
    }
    fs::path solved(const fs::path& chain, const std::string& name) {
        const fs::path result = dir_ / name;
        const CommandResult r =
            run_command(command({"solve", chain.string(), "-q", "-o", result.string()}, 0));
        EXPECT_EQ(r.exit_code, 0) << r.describe();
        return result;
    }
    // Replaces the chain file's contents, keeping its name (as a user who
    // regenerates a chain with other rates would).
    void rewrite(const fs::path& chain, const Chain& c) {
        longrun::io::write_chain_file(chain.string(), c);
    }
};

TEST_F(CliIntegrity, SummarizeRefusesAChainThatChangedSinceTheSolve) {
    const auto chain = write_chain("queue.h5", six_state_dtmc());
    const auto result = solved(chain, "result.h5");
    const std::string before = hash_of(chain);
    rewrite(chain, reweighted_six_state_dtmc());
    const std::string after = hash_of(chain);
    ASSERT_NE(before, after);
    expect_refused({"summarize", result.string(), "-q"}, result, code(ExitCode::bad_input),
                   {chain.string(), before, after, "--chain"});
    // Named explicitly, the changed chain is refused alike.
    expect_refused({"summarize", result.string(), "-q", "--chain", chain.string()}, result,
                   code(ExitCode::bad_input), {chain.string(), before, after});
}

TEST_F(CliIntegrity, SummarizeAcceptsAChainThatWasOnlyMoved) {
    const auto chain = write_chain("queue.h5", six_state_dtmc());
    const auto result = solved(chain, "result.h5");
    fs::create_directories(dir_ / "archive");
    const fs::path moved = dir_ / "archive" / "queue-2024.h5";
    fs::rename(chain, moved);
    const CommandResult named =
        run_command(command({"summarize", result.string(), "-q", "--chain", moved.string()}, 0));
    EXPECT_EQ(named.exit_code, 0) << named.describe();
    EXPECT_TRUE(named.err.empty()) << named.describe();
    // Moved together with its result: found beside it by name.
    const fs::path result_moved = dir_ / "archive" / "result.h5";
    fs::rename(result, result_moved);
    fs::rename(moved, dir_ / "archive" / "queue.h5");
    const CommandResult beside =
        run_command(command({"summarize", result_moved.string(), "-q", "--no-store"}, 0));
    EXPECT_EQ(beside.exit_code, 0) << beside.describe();
}

TEST_F(CliIntegrity, AResultWithoutAHashIsAcceptedWithOneNote) {
    const auto chain = write_chain("queue.h5", six_state_dtmc());
    const auto result = solved(chain, "result.h5");
    {
        RawFile f(result);
        f.remove_attribute("/", "chain_hash");
        f.remove_attribute("/", "chain_hash_method");
    }
    const CommandResult r =
        run_command(command({"summarize", result.string(), "-q", "--no-store"}, 0));
    EXPECT_EQ(r.exit_code, 0) << r.describe();
    const auto lines = lines_of(r.err);
    ASSERT_EQ(lines.size(), 1u) << r.describe();
    EXPECT_TRUE(lines.front().starts_with("longrun: note: " + result.string())) << r.describe();
    EXPECT_NE(lines.front().find("number of states"), std::string::npos) << r.describe();
}

TEST_F(CliIntegrity, SimulateAgainstAResultOfAChangedChainIsRefused) {
    const auto chain = write_chain("queue.h5", six_state_dtmc());
    const auto result = solved(chain, "result.h5");
    const std::string before = hash_of(chain);
    rewrite(chain, reweighted_six_state_dtmc());
    expect_refused(
        {"simulate", chain.string(), "--steps", "1000", "-q", "--against", result.string()}, result,
        code(ExitCode::bad_input), {chain.string(), before, hash_of(chain)});
}

TEST_F(CliIntegrity, WarmStartFromAnotherChainsResultNeedsItsOption) {
    const auto first = write_chain("first.h5", six_state_dtmc());
    const auto earlier = solved(first, "earlier.h5");
    const auto second = write_chain("second.h5", reweighted_six_state_dtmc());
    expect_refused(solve_args(second, {"--start", earlier.string()}), earlier,
                   code(ExitCode::bad_input),
                   {second.string(), hash_of(first), hash_of(second), "--start-other-chain"});
    expect_solved(second, 6, {"--start", earlier.string(), "--start-other-chain"});
    fs::remove(out_);
    // From a result of the same chain, nothing is needed.
    expect_solved(first, 6, {"--start", earlier.string()});
}

TEST_F(CliIntegrity, ResumeFromACheckpointOfAChangedChainIsRefused) {
    const auto chain = write_chain("steps.h5", stepping_dtmc(false));
    const auto checkpoint = dir_ / "ck.h5";
    const CommandResult first = run_command(command(
        {"solve", chain.string(), "-q", "--tol", "1e-30", "--checkpoint", checkpoint.string()}, 0));
    ASSERT_EQ(first.exit_code, code(ExitCode::numerical)) << first.describe();
    ASSERT_TRUE(fs::exists(checkpoint));
    const std::string before = hash_of(chain);
    // Same states and transitions: only the hash tells the chains apart.
    rewrite(chain, stepping_dtmc(true));
    expect_refused(solve_args(chain, {"--resume", checkpoint.string()}), checkpoint,
                   code(ExitCode::bad_input), {chain.string(), before, hash_of(chain)});
}

// Bit 0 of the low byte of row 3's first probability: 0.25 becomes 0.25 plus
// one unit in the last place, a valid probability within the row-sum tolerance.
TEST_F(CliIntegrity, AFlippedBitInTheWeightsFailsTheChecksum) {
    const auto chain = write_chain("queue.h5", six_state_dtmc());
    flip_bit(chain, data_address(chain, "/chain/weights", row3));
    for (int ranks : {0, 2}) {
        expect_solve_refused(chain, code(ExitCode::bad_input), {"/chain/weights", "checksum"}, {},
                             ranks);
        expect_refused({"check", chain.string()}, chain, code(ExitCode::bad_input),
                       {"/chain/weights", "checksum"}, ranks);
    }
}

TEST_F(CliIntegrity, AFlippedBitInAResultFailsTheChecksum) {
    const auto chain = write_chain("queue.h5", six_state_dtmc());
    const auto result = solved(chain, "result.h5");
    flip_bit(result, data_address(result, "/distribution", 2));
    expect_refused({"summarize", result.string(), "-q"}, result, code(ExitCode::bad_input),
                   {"/distribution", "checksum"});
}

} // namespace

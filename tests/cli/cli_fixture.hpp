// Shared by the command-line catalogues: a scratch folder per test, raw HDF5
// edits for files the io writer will not produce, and the checks every refusal
// must pass. A batch script can only go by the exit code and the log, so a
// refusal must be exactly one line that names the file at fault, must leave no
// result and no half-written temporary file behind, and must never touch the
// input.
#pragma once

#include "run_command.hpp"

#include "io/chain.hpp"
#include "io/chain_file.hpp"
#include "io/error.hpp"

#include <gtest/gtest.h>
#include <hdf5.h>

#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <numeric>
#include <set>
#include <stdexcept>
#include <string>
#include <vector>

namespace longrun::test {

namespace fs = std::filesystem;

inline constexpr const char* mpirun = "/usr/bin/mpirun";
inline constexpr uid_t nobody = 65534;

inline int code(ExitCode c) {
    return static_cast<int>(c);
}

inline std::string read_bytes(const fs::path& p) {
    std::ifstream in(p, std::ios::binary);
    return {std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>()};
}

inline std::set<std::string> listing(const fs::path& dir) {
    std::set<std::string> names;
    for (const auto& e : fs::directory_iterator(dir))
        names.insert(e.path().filename().string());
    return names;
}

// Six states; row r goes to r-1, r+1 and r+2 (mod 6) with 1/4, 1/2, 1/4 in
// target order. Irreducible and aperiodic, so the valid file solves. Row 3 is
// entries 9..11 with targets {2, 4, 5}: the cases break row 3 (not row 0) so
// that a message naming the wrong row cannot pass.
inline io::Chain six_state_dtmc() {
    io::Chain c;
    c.kind = io::ChainKind::dtmc;
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
inline constexpr std::size_t row3 = 9; // first entry of row 3
inline constexpr std::size_t row4 = 12;
inline constexpr std::size_t row1 = 3;

// Where element `index` of a dataset is stored in the file: contiguous, or (as
// longrun writes them) chunked without compression.
inline std::uint64_t data_address(const fs::path& p, const char* dataset, std::uint64_t index = 0) {
    const hid_t f = H5Fopen(p.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT);
    const hid_t d = H5Dopen2(f, dataset, H5P_DEFAULT);
    const hid_t type = H5Dget_type(d);
    const std::uint64_t width = H5Tget_size(type);
    haddr_t a = H5Dget_offset(d);
    if (a != HADDR_UNDEF) {
        a += index * width;
    } else {
        const hid_t dcpl = H5Dget_create_plist(d);
        hsize_t chunk = 0;
        const hid_t space = H5Dget_space(d);
        hsize_t origin[1] = {0}, size = 0;
        unsigned mask = 0;
        if (H5Pget_chunk(dcpl, 1, &chunk) == 1 && chunk > 0 &&
            H5Dget_chunk_info(d, space, index / chunk, origin, &mask, &a, &size) >= 0 &&
            a != HADDR_UNDEF)
            a += (index % chunk) * width;
        H5Sclose(space);
        H5Pclose(dcpl);
    }
    H5Tclose(type);
    H5Dclose(d);
    H5Fclose(f);
    if (a == HADDR_UNDEF)
        throw std::runtime_error(std::string("no data address for ") + dataset);
    return a;
}

// Damage after the write: one bit of one stored byte inverted.
inline void flip_bit(const fs::path& p, std::uint64_t at) {
    std::fstream file(p, std::ios::in | std::ios::out | std::ios::binary);
    file.seekg(static_cast<std::streamoff>(at));
    char byte = 0;
    file.read(&byte, 1);
    byte = static_cast<char>(byte ^ 0x01);
    file.seekp(static_cast<std::streamoff>(at));
    file.write(&byte, 1);
    if (!file)
        throw std::runtime_error("cannot flip a byte of " + p.string());
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

    // Replaces a dataset by one of any type and shape; no dims: a scalar.
    // `data` is in `memtype` (default: the file type) and converted by HDF5.
    void replace(const char* path, hid_t type, const std::vector<hsize_t>& dims, const void* data,
                 hid_t memtype = H5I_INVALID_HID) {
        if (H5Lexists(id_, path, H5P_DEFAULT) > 0)
            remove(path);
        const hid_t space =
            dims.empty() ? H5Screate(H5S_SCALAR)
                         : H5Screate_simple(static_cast<int>(dims.size()), dims.data(), nullptr);
        const hid_t d = H5Dcreate2(id_, path, type, space, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
        check(d, path);
        check(H5Dwrite(d, memtype == H5I_INVALID_HID ? type : memtype, H5S_ALL, H5S_ALL,
                       H5P_DEFAULT, data),
              path);
        H5Dclose(d);
        H5Sclose(space);
    }

    // A chunked 1-d dataset that claims `extent` elements but holds only the
    // chunks `head` covers: a tiny file that announces a huge array.
    void replace_sparse(const char* path, hid_t type, hsize_t extent, hsize_t chunk,
                        const void* head, hsize_t head_length) {
        if (H5Lexists(id_, path, H5P_DEFAULT) > 0)
            remove(path);
        const hid_t space = H5Screate_simple(1, &extent, nullptr);
        const hid_t dcpl = H5Pcreate(H5P_DATASET_CREATE);
        check(H5Pset_chunk(dcpl, 1, &chunk), path);
        const hid_t d = H5Dcreate2(id_, path, type, space, H5P_DEFAULT, dcpl, H5P_DEFAULT);
        check(d, path);
        const hsize_t start = 0;
        check(H5Sselect_hyperslab(space, H5S_SELECT_SET, &start, nullptr, &head_length, nullptr),
              path);
        const hid_t memspace = H5Screate_simple(1, &head_length, nullptr);
        check(H5Dwrite(d, type, memspace, space, H5P_DEFAULT, head), path);
        H5Sclose(memspace);
        H5Dclose(d);
        H5Pclose(dcpl);
        H5Sclose(space);
    }

    void replace_unwritten(const char* path, hid_t type, hsize_t length) {
        if (H5Lexists(id_, path, H5P_DEFAULT) > 0)
            remove(path);
        const hid_t space = H5Screate_simple(1, &length, nullptr);
        const hid_t d = H5Dcreate2(id_, path, type, space, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
        check(d, path);
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
    void remove_attribute(const char* object, const char* name) {
        check(H5Adelete_by_name(id_, object, name, H5P_DEFAULT), name);
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

class CliFixture : public testing::Test {
  protected:
    void SetUp() override {
        const char* b = std::getenv("LONGRUN_BINARY");
        binary_ = b ? b : "";
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

    fs::path write_chain(const std::string& name, const io::Chain& c) {
        const auto p = dir_ / name;
        io::write_chain_file(p.string(), c);
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
    // complete, sums to one and sits under its final name only. Returns the
    // distribution (empty after a fatal failure) and what the run did.
    std::vector<double> expect_solved(const fs::path& input, std::uint64_t states,
                                      const std::vector<std::string>& extra,
                                      bool every_entry_positive = true,
                                      CommandResult* run = nullptr) {
        const std::string before = read_bytes(input);
        const CommandResult r = run_command(command(solve_args(input, extra), 0));
        if (run)
            *run = r;
        EXPECT_EQ(r.exit_code, 0) << r.describe();
        if (r.exit_code != 0)
            return {};
        EXPECT_TRUE(r.err.empty()) << "-q: nothing on stderr\n" << r.describe();
        EXPECT_TRUE(fs::exists(out_));
        for (const auto& name : listing(dir_))
            EXPECT_FALSE(name.starts_with(".OUT.h5.tmp")) << "leftover temporary file " << name;
        EXPECT_TRUE(read_bytes(input) == before) << "the input was modified";

        const hid_t f = H5Fopen(out_.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT);
        EXPECT_GE(f, 0);
        if (f < 0)
            return {};
        const hid_t d = H5Dopen2(f, "/distribution", H5P_DEFAULT);
        const hid_t space = H5Dget_space(d);
        hsize_t n = 0;
        H5Sget_simple_extent_dims(space, &n, nullptr);
        std::vector<double> pi(n);
        if (n == states)
            H5Dread(d, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, pi.data());
        H5Sclose(space);
        H5Dclose(d);
        H5Fclose(f);
        EXPECT_EQ(n, states);
        if (n != states)
            return {};
        EXPECT_NEAR(std::accumulate(pi.begin(), pi.end(), 0.0), 1.0, 1e-12);
        if (every_entry_positive) {
            for (double p : pi)
                EXPECT_GT(p, 0.0);
        }
        return pi;
    }

    std::string binary_;
    fs::path dir_, out_;
};

} // namespace longrun::test

// What a result or checkpoint records about its chain, and what protects the
// files themselves, on 1, 2 and 3 ranks:
// - the content hash (io/chain_hash.hpp) is the same however many ranks read
//   the chain, with whichever rows each, and however the file stores it
//   (chunk length, compression); it changes when any value that gives the
//   chain its meaning changes, by as little as one unit in the last place;
// - every dataset written carries a Fletcher32 checksum, and a byte flipped in
//   /chain/weights after the file was written is refused on every rank alike
//   (agreed), as bad input naming the dataset.
#include "io/chain_file.hpp"
#include "io/chain_hash.hpp"
#include "io/error.hpp"
#include "io/hdf5.hpp"
#include "partition/contiguous.hpp"

#include <gtest/gtest.h>
#include <hdf5.h>
#include <mpi.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <random>
#include <set>
#include <string>
#include <vector>

namespace {

using namespace longrun;
namespace fs = std::filesystem;

int world_rank() {
    int r = 0;
    MPI_Comm_rank(MPI_COMM_WORLD, &r);
    return r;
}

int world_size() {
    int n = 1;
    MPI_Comm_size(MPI_COMM_WORLD, &n);
    return n;
}

class ChainIntegrity : public ::testing::Test {
  protected:
    void SetUp() override {
        std::string dir;
        if (world_rank() == 0) {
            std::random_device rd;
            dir = (fs::temp_directory_path() / ("longrun-integrity-" + std::to_string(rd())))
                      .string();
            fs::create_directories(dir);
        }
        unsigned long n = dir.size();
        MPI_Bcast(&n, 1, MPI_UNSIGNED_LONG, 0, MPI_COMM_WORLD);
        dir.resize(n);
        MPI_Bcast(dir.data(), static_cast<int>(n), MPI_CHAR, 0, MPI_COMM_WORLD);
        folder = dir;
    }
    void TearDown() override {
        MPI_Barrier(MPI_COMM_WORLD);
        if (world_rank() == 0) {
            std::error_code ignored;
            fs::remove_all(folder, ignored);
        }
    }

    std::string write(const io::Chain& chain, const std::string& name, h5::Layout layout = {}) {
        const std::string path = folder + "/" + name;
        if (world_rank() == 0)
            io::write_chain_file(path, chain, layout);
        MPI_Barrier(MPI_COMM_WORLD);
        return path;
    }

    // The hash as a collective read over all ranks with the given rows. Rows are
    // rescaled where needed (the ctmc's rates read as a dtmc): after the hash.
    static std::string hash_read(const std::string& path, RowRange rows) {
        const auto header = io::read_chain_header(path, MPI_COMM_WORLD);
        io::ValidationOptions options;
        options.renormalize = true;
        return io::read_chain_slice(header, rows, MPI_COMM_WORLD, options).content_hash;
    }
    static std::string hash_read(const std::string& path) {
        const auto header = io::read_chain_header(path, MPI_COMM_WORLD);
        return hash_read(path, partition::even_rows(header.states, world_size(), world_rank()));
    }

    std::string folder;
};

// A labelled birth-death ctmc on 0..K (K + 1 states) with a state variable, a
// measure and an event intensity: every part the hash covers.
io::Chain full_chain(int K) {
    std::vector<std::uint64_t> s, t;
    std::vector<double> w;
    for (int n = 0; n <= K; ++n) {
        if (n > 0) {
            s.push_back(n);
            t.push_back(n - 1);
            w.push_back(1.0);
        }
        if (n < K) {
            s.push_back(n);
            t.push_back(n + 1);
            w.push_back(0.7);
        }
    }
    io::Chain c = io::chain_from_triples(io::ChainKind::ctmc, K + 1, s, t, w);
    for (std::uint64_t r = 0; r < c.states; ++r)
        for (auto k = c.offsets[r]; k < c.offsets[r + 1]; ++k)
            c.events.push_back(c.targets[k] > r ? 0 : 1);
    c.event_names = {"arrive", "leave"};
    io::StateVariable q{"queue", true, {}, 0.0, static_cast<double>(K)};
    io::Measure cost{"cost", {}}, arrive{"arrive", {}};
    for (int n = 0; n <= K; ++n) {
        q.values.push_back(n);
        cost.values.push_back(0.5 * n);
        arrive.values.push_back(0.7);
    }
    c.variables = {q};
    c.measures = {cost};
    c.event_intensities = {arrive};
    return c;
}

constexpr int K = 40;

TEST_F(ChainIntegrity, HashIsTheSameOnAnyNumberOfRanksAndAnyRows) {
    const auto path = write(full_chain(K), "queue.h5");
    // Every rank alone, reading the whole chain, is the reference.
    const std::string alone = io::read_whole_chain(path, {}).content_hash;
    ASSERT_EQ(alone.size(), 32u);
    EXPECT_EQ(hash_read(path), alone);
    // Uneven rows: rank 0 a short block, the middle ranks the rest, and the
    // last rank (when there are several) none at all.
    const int n = world_size(), r = world_rank();
    const std::uint64_t states = K + 1, cut = 7;
    const int active = n == 1 ? 1 : n - 1;
    RowRange rows{states, states};
    if (r == 0)
        rows = {0, active == 1 ? states : cut};
    else if (r < active) {
        const RowRange part = partition::even_rows(states - cut, active - 1, r - 1);
        rows = {cut + part.begin, cut + part.end};
    }
    EXPECT_EQ(hash_read(path, rows), alone);
}

TEST_F(ChainIntegrity, HashIgnoresHowTheFileStoresTheValues) {
    const auto plain = write(full_chain(K), "plain.h5");
    const auto small_chunks = write(full_chain(K), "chunks.h5", {5, 0, true});
    const auto deflated = write(full_chain(K), "deflated.h5", {16, 6, true});
    const auto contiguous = write(full_chain(K), "contiguous.h5", {0, 0, false});
    const std::string reference = hash_read(plain);
    EXPECT_EQ(hash_read(small_chunks), reference);
    EXPECT_EQ(hash_read(deflated), reference);
    EXPECT_EQ(hash_read(contiguous), reference);
}

TEST_F(ChainIntegrity, HashChangesWithEveryPartOfTheChain) {
    const std::string reference = hash_read(write(full_chain(K), "reference.h5"));
    std::vector<std::pair<std::string, io::Chain>> variants;
    auto variant = [&](const std::string& name, auto&& change) {
        io::Chain c = full_chain(K);
        change(c);
        variants.emplace_back(name, std::move(c));
    };
    // One unit in the last place of one rate, in the middle of the chain.
    variant("rate", [](io::Chain& c) { c.weights[37] = std::nextafter(c.weights[37], 2.0); });
    // Two rates swapped: the same multiset of values, elsewhere.
    variant("swap", [](io::Chain& c) { std::swap(c.weights[10], c.weights[11]); });
    variant("label", [](io::Chain& c) { c.events[20] ^= 1; });
    variant("names", [](io::Chain& c) { c.event_names = {"arrive", "depart"}; });
    variant("kind", [](io::Chain& c) { c.kind = io::ChainKind::dtmc; });
    variant("variable", [](io::Chain& c) { c.variables[0].values[5] = 6; });
    variant("bound", [](io::Chain& c) { c.variables[0].upper = K + 1.0; });
    variant("measure", [](io::Chain& c) { c.measures[0].values[K] += 1; });
    variant("measure name", [](io::Chain& c) { c.measures[0].name = "price"; });
    variant("no measure", [](io::Chain& c) { c.measures.clear(); });
    variant("intensity", [](io::Chain& c) { c.event_intensities[0].values[0] = 0.8; });
    variant("no labels", [](io::Chain& c) {
        c.events.clear();
        c.event_names.clear();
    });
    std::set<std::string> seen{reference};
    for (const auto& [name, chain] : variants) {
        const std::string h = hash_read(write(chain, "variant.h5"));
        EXPECT_NE(h, reference) << name;
        EXPECT_TRUE(seen.insert(h).second) << name << " hashes like another variant";
    }
}

// Where element `index` of a chunked dataset is stored in the file.
std::uint64_t stored_at(const std::string& path, const char* dataset, std::uint64_t index) {
    const hid_t f = H5Fopen(path.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT);
    const hid_t d = H5Dopen2(f, dataset, H5P_DEFAULT);
    const hid_t dcpl = H5Dget_create_plist(d);
    hsize_t chunk = 0;
    EXPECT_EQ(H5Pget_chunk(dcpl, 1, &chunk), 1);
    const hid_t space = H5Dget_space(d);
    hsize_t offset[1] = {0}, size = 0;
    unsigned mask = 0;
    haddr_t address = HADDR_UNDEF;
    EXPECT_GE(H5Dget_chunk_info(d, space, index / chunk, offset, &mask, &address, &size), 0);
    H5Sclose(space);
    H5Pclose(dcpl);
    H5Dclose(d);
    H5Fclose(f);
    EXPECT_NE(address, HADDR_UNDEF);
    return address + (index % chunk) * 8;
}

void flip_byte(const std::string& path, std::uint64_t at) {
    std::fstream file(path, std::ios::in | std::ios::out | std::ios::binary);
    file.seekg(static_cast<std::streamoff>(at));
    char byte = 0;
    file.read(&byte, 1);
    byte = static_cast<char>(byte ^ 0x10);
    file.seekp(static_cast<std::streamoff>(at));
    file.write(&byte, 1);
}

TEST_F(ChainIntegrity, EveryDatasetWrittenCarriesAChecksum) {
    const auto path = write(full_chain(K), "queue.h5");
    if (world_rank() == 0) {
        const hid_t f = H5Fopen(path.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT);
        for (const char* name :
             {"/chain/offsets", "/chain/targets", "/chain/weights", "/chain/events",
              "/states/queue", "/measures/cost", "/events/arrive"}) {
            const hid_t d = H5Dopen2(f, name, H5P_DEFAULT);
            const hid_t dcpl = H5Dget_create_plist(d);
            EXPECT_EQ(H5Pget_layout(dcpl), H5D_CHUNKED) << name;
            EXPECT_GT(H5Pget_filter_by_id2(dcpl, H5Z_FILTER_FLETCHER32, nullptr, nullptr, nullptr,
                                           0, nullptr, nullptr),
                      -1)
                << name;
            H5Pclose(dcpl);
            H5Dclose(d);
        }
        H5Fclose(f);
    }
}

TEST_F(ChainIntegrity, AFlippedByteInTheWeightsIsRefusedOnEveryRank) {
    const auto path = write(full_chain(K), "queue.h5");
    if (world_rank() == 0)
        // The low byte of a rate near the end: still a valid positive rate, so
        // only the checksum can tell.
        flip_byte(path, stored_at(path, "/chain/weights", 70));
    MPI_Barrier(MPI_COMM_WORLD);
    try {
        (void)hash_read(path);
        ADD_FAILURE() << "the damaged file was read";
    } catch (const Error& e) {
        EXPECT_EQ(e.code(), ExitCode::bad_input);
        EXPECT_TRUE(e.agreed()) << e.what();
        const std::string message = e.what();
        EXPECT_NE(message.find(path), std::string::npos) << message;
        EXPECT_NE(message.find("/chain/weights"), std::string::npos) << message;
        EXPECT_NE(message.find("checksum"), std::string::npos) << message;
    }
}

} // namespace

// The chain file's optional parts from `generate` (/events intensities, /model)
// read as row slices on 1, 2 and 3 ranks; the /summary part of a result file;
// the result reader; and failed summary writes leaving the result as it was.
#include "io/chain_file.hpp"
#include "io/error.hpp"
#include "io/hdf5.hpp"
#include "io/result_file.hpp"
#include "io/summary_file.hpp"
#include "partition/contiguous.hpp"

#include <gtest/gtest.h>
#include <mpi.h>
#include <unistd.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <limits>
#include <random>
#include <sstream>
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

class ChainParts : public ::testing::Test {
  protected:
    void SetUp() override {
        std::string dir;
        if (world_rank() == 0) {
            std::random_device rd;
            dir = (fs::temp_directory_path() / ("longrun-parts-" + std::to_string(rd()))).string();
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
            fs::permissions(folder, fs::perms::owner_all, ignored);
            fs::remove_all(folder, ignored);
        }
    }

    // Rank 0 writes; every rank gets the path once the file is complete.
    std::string write(const io::Chain& chain, const std::string& name) const {
        const std::string path = folder + "/" + name;
        if (world_rank() == 0)
            io::write_chain_file(path, chain);
        MPI_Barrier(MPI_COMM_WORLD);
        return path;
    }

    std::string folder;
};

// A birth-death chain on 0..K with what `generate` adds. "leave" comes first,
// so that the order read back is the order written, not alphabetical.
io::Chain chain_with_parts(int K) {
    std::vector<std::uint64_t> s, t;
    std::vector<double> w;
    io::Measure leave{"leave", {}}, arrive{"arrive", {}};
    for (int n = 0; n <= K; ++n) {
        if (n > 0) {
            s.push_back(n);
            t.push_back(n - 1);
            w.push_back(1.0 * std::min(n, 2));
        }
        if (n < K) {
            s.push_back(n);
            t.push_back(n + 1);
            w.push_back(1.5);
        }
        leave.values.push_back(1.0 * std::min(n, 2));
        arrive.values.push_back(1.5); // lost at K, yet still arriving
    }
    io::Chain c = io::chain_from_triples(io::ChainKind::ctmc, K + 1, s, t, w);
    c.event_intensities = {leave, arrive};
    c.parameters = {{"service", 1.0}, {"arrival", 1.5}, {"third", 1.0 / 3.0}, {"tiny", 1e-300}};
    c.model_file = "models/queue: ä.yaml";
    c.model_text = "kind: ctmc\n# ünïcode and \"quotes\"\nparameters: {arrival: 1.5}\n";
    return c;
}

// Errors agreed across ranks arrive as Error with the code of the typed one.
template <class E, class Body>
void expect_error(Body&& body, std::initializer_list<std::string> pieces) {
    try {
        body();
        ADD_FAILURE() << "no error; expected one containing '" << *pieces.begin() << "'";
    } catch (const Error& e) {
        EXPECT_EQ(e.code(), E("").code()) << e.what();
        const std::string what = e.what();
        for (const auto& p : pieces)
            EXPECT_NE(what.find(p), std::string::npos) << "'" << p << "' missing from: " << what;
    }
}

TEST_F(ChainParts, RoundTripAsRowSlices) {
    const io::Chain whole = chain_with_parts(10);
    const std::string path = write(whole, "parts.h5");
    const io::ChainHeader h = io::read_chain_header(path, MPI_COMM_WORLD);
    EXPECT_EQ(h.intensities, (std::vector<std::string>{"leave", "arrive"}));
    const RowRange rows = partition::even_rows(h.states, world_size(), world_rank());
    const io::Chain c = io::read_chain_slice(h, rows, MPI_COMM_WORLD, {});
    ASSERT_EQ(c.event_intensities.size(), 2u);
    for (std::size_t e = 0; e < 2; ++e) {
        EXPECT_EQ(c.event_intensities[e].name, whole.event_intensities[e].name);
        const auto& all = whole.event_intensities[e].values;
        EXPECT_EQ(c.event_intensities[e].values,
                  std::vector<double>(all.begin() + rows.begin, all.begin() + rows.end));
    }
    // Exact: the header travels between ranks as text, and must not round.
    EXPECT_EQ(c.parameters, whole.parameters);
    EXPECT_EQ(c.model_file, whole.model_file);
    EXPECT_EQ(c.model_text, whole.model_text);
}

TEST_F(ChainParts, RanksWithoutRowsTakePart) {
    const io::Chain whole = chain_with_parts(1); // 2 states: on 3 ranks one has none
    const std::string path = write(whole, "two.h5");
    const io::ChainHeader h = io::read_chain_header(path, MPI_COMM_WORLD);
    const RowRange rows = partition::even_rows(h.states, world_size(), world_rank());
    const io::Chain c = io::read_chain_slice(h, rows, MPI_COMM_WORLD, {});
    ASSERT_EQ(c.event_intensities.size(), 2u);
    EXPECT_EQ(c.event_intensities[1].values.size(), rows.size());
    EXPECT_EQ(c.parameters.size(), 4u);
}

TEST_F(ChainParts, ChainWithoutThePartsReadsEmpty) {
    io::Chain plain = chain_with_parts(4);
    plain.event_intensities.clear();
    plain.parameters.clear();
    plain.model_file.clear();
    plain.model_text.clear();
    const std::string path = write(plain, "plain.h5");
    const io::ChainHeader h = io::read_chain_header(path, MPI_COMM_WORLD);
    const io::Chain c = io::read_chain_slice(
        h, partition::even_rows(h.states, world_size(), world_rank()), MPI_COMM_WORLD, {});
    EXPECT_TRUE(c.event_intensities.empty());
    EXPECT_TRUE(c.parameters.empty());
    EXPECT_TRUE(c.model_text.empty());
}

TEST_F(ChainParts, WrongLengthIsRefusedNamingTheDataset) {
    io::Chain bad = chain_with_parts(6);
    bad.event_intensities[1].values.pop_back();
    const std::string path = write(bad, "short.h5");
    expect_error<InputError>([&] { io::read_chain_header(path, MPI_COMM_WORLD); },
                             {path, "/events/arrive", "6 elements", "expected 7"});
}

TEST_F(ChainParts, NegativeAndNonFiniteEntriesNameTheRow) {
    io::Chain negative = chain_with_parts(8);
    negative.event_intensities[1].values[5] = -0.5;
    io::Chain nan = chain_with_parts(8);
    nan.event_intensities[0].values[7] = std::numeric_limits<double>::quiet_NaN();
    const std::string p1 = write(negative, "negative.h5");
    const std::string p2 = write(nan, "nan.h5");
    for (const auto& [path, dataset, row, why] :
         {std::tuple{p1, "/events/arrive", "row 5", "negative"},
          std::tuple{p2, "/events/leave", "row 7", "not finite"}}) {
        const io::ChainHeader h = io::read_chain_header(path, MPI_COMM_WORLD);
        const RowRange rows = partition::even_rows(h.states, world_size(), world_rank());
        // Every rank gets the same error, also those that do not hold the row.
        expect_error<InputError>([&] { io::read_chain_slice(h, rows, MPI_COMM_WORLD, {}); },
                                 {path, dataset, row, why});
    }
}

// ---- the result file: serial, each rank on a file of its own -----------------

std::string slurp(const std::string& path) {
    std::ifstream in(path, std::ios::binary);
    std::stringstream s;
    s << in.rdbuf();
    return s.str();
}

io::ResultContent result_content() {
    io::ResultContent r;
    r.origin = {
        "chains/queue.h5", 123456, 1700000000, "test", "ctmc", "0123456789abcdef0123456789abcdef",
        "test rule"};
    auto& c = r.certificate;
    c.method = "linear";
    c.trace = {"power: stalled", "linear: certified"};
    c.iterations = 17;
    c.residual = 3.5e-13;
    c.tolerance = 1e-10;
    c.residual_definition = "||pi Q||_1 / max_i |q_ii|";
    c.converged = true;
    c.wall_seconds = 0.25;
    c.ranks = 3;
    c.norm_error = 1e-15;
    r.history = {{"1-power", {1.0, 0.5}}, {"2-linear", {0.1, 1e-5, 1e-12}}, {"10-gth", {1e-16}}};
    io::DistributionSummary v;
    v.name = "n";
    v.values = {0, 1, 2, 3};
    v.pmf = {0.1, 0.2, 0.3, 0.4};
    v.tail = {1.0, 0.9, 0.7, 0.4};
    v.mean = 2.0;
    r.variables = {v};
    return r;
}

const std::vector<double> distribution{0.1, 0.2, 0.3, 0.4};

std::string write_result(const std::string& folder, const std::string& stem) {
    const std::string path = folder + "/" + stem + "-r" + std::to_string(world_rank()) + ".h5";
    io::write_result_file(path, MPI_COMM_SELF, result_content(), {0, 4}, 4, distribution);
    return path;
}

io::SummaryRecord summary_record() {
    io::SummaryRecord s;
    io::MeasureRecord load;
    load.name = "load";
    load.origin = "--measure load=queue+busy";
    load.values = {0, 1, 2, 3};
    load.pmf = {0.1, 0.2, 0.3, 0.4};
    load.tail = {1.0, 0.9, 0.7, 0.4};
    load.mean = 2.0;
    load.std = 1.0;
    load.quantiles = {{0.5, 2.0}, {0.999, 3.0}};
    load.given = {{"busy==workers", 0.25, 2.5}, {"queue>9", 0.0, std::nullopt}};
    load.lower_bound = 0;
    load.upper_bound = 3;
    load.mass_at_upper = 0.4;
    io::MeasureRecord odd = load;
    odd.name = "waiting/hour 100%";
    odd.origin = "chain measure";
    odd.binned = true;
    odd.integral = false;
    odd.given.clear();
    odd.lower_bound.reset();
    odd.upper_bound.reset();
    odd.mass_at_upper.reset();
    s.measures = {load, odd};
    s.probabilities = {{"load>=2", "load>=2", 0.7}, {"full", "queue==room", 0.4}};
    s.events = {{"arrive", "", 1.5, "event intensities"},
                {"lost/arrival", "lost/arrive", 0.04, "--rate"}};
    s.rate_unit = "per unit time";
    s.likely_states = {{3, 0.4, {{"queue", 3}, {"index", 7}}},
                       {2, 0.3, {{"queue", 2}, {"index", 8}}}};
    return s;
}

void expect_same(const io::SummaryRecord& a, const io::SummaryRecord& b) {
    ASSERT_EQ(a.measures.size(), b.measures.size());
    for (std::size_t i = 0; i < a.measures.size(); ++i) {
        const auto &x = a.measures[i], &y = b.measures[i];
        EXPECT_EQ(x.name, y.name);
        EXPECT_EQ(x.origin, y.origin);
        EXPECT_EQ(x.integral, y.integral);
        EXPECT_EQ(x.binned, y.binned);
        EXPECT_EQ(x.values, y.values);
        EXPECT_EQ(x.pmf, y.pmf);
        EXPECT_EQ(x.tail, y.tail);
        EXPECT_EQ(x.mean, y.mean);
        EXPECT_EQ(x.std, y.std);
        ASSERT_EQ(x.quantiles.size(), y.quantiles.size());
        for (std::size_t q = 0; q < x.quantiles.size(); ++q) {
            EXPECT_EQ(x.quantiles[q].level, y.quantiles[q].level);
            EXPECT_EQ(x.quantiles[q].value, y.quantiles[q].value);
        }
        ASSERT_EQ(x.given.size(), y.given.size());
        for (std::size_t g = 0; g < x.given.size(); ++g) {
            EXPECT_EQ(x.given[g].condition, y.given[g].condition);
            EXPECT_EQ(x.given[g].probability, y.given[g].probability);
            EXPECT_EQ(x.given[g].mean, y.given[g].mean);
        }
        EXPECT_EQ(x.lower_bound, y.lower_bound);
        EXPECT_EQ(x.upper_bound, y.upper_bound);
        EXPECT_EQ(x.mass_at_lower, y.mass_at_lower);
        EXPECT_EQ(x.mass_at_upper, y.mass_at_upper);
    }
    ASSERT_EQ(a.probabilities.size(), b.probabilities.size());
    for (std::size_t i = 0; i < a.probabilities.size(); ++i) {
        EXPECT_EQ(a.probabilities[i].name, b.probabilities[i].name);
        EXPECT_EQ(a.probabilities[i].condition, b.probabilities[i].condition);
        EXPECT_EQ(a.probabilities[i].probability, b.probabilities[i].probability);
    }
    ASSERT_EQ(a.events.size(), b.events.size());
    for (std::size_t i = 0; i < a.events.size(); ++i) {
        EXPECT_EQ(a.events[i].name, b.events[i].name);
        EXPECT_EQ(a.events[i].expression, b.events[i].expression);
        EXPECT_EQ(a.events[i].rate, b.events[i].rate);
        EXPECT_EQ(a.events[i].source, b.events[i].source);
    }
    EXPECT_EQ(a.rate_unit, b.rate_unit);
    ASSERT_EQ(a.likely_states.size(), b.likely_states.size());
    for (std::size_t i = 0; i < a.likely_states.size(); ++i) {
        EXPECT_EQ(a.likely_states[i].index, b.likely_states[i].index);
        EXPECT_EQ(a.likely_states[i].probability, b.likely_states[i].probability);
        EXPECT_EQ(a.likely_states[i].variables, b.likely_states[i].variables);
    }
}

TEST_F(ChainParts, SummaryRoundTripKeepsWhatSolveWrote) {
    const std::string path = write_result(folder, "result");
    const io::SummaryRecord record = summary_record();
    io::write_summary(path, record);
    expect_same(io::read_summary(path), record);

    // The layout as other tools see it, read with plain HDF5 calls.
    h5::Handle f = h5::open_for_reading(path, std::nullopt);
    EXPECT_TRUE(h5::exists(f, "/summary/variables/n/pmf")); // solve's part stays
    {
        h5::Handle g = h5::open_group(f, "/summary/measures/load", path);
        EXPECT_EQ(h5::read_f64_attribute(g, "q0.999", path, "load"), 3.0);
        EXPECT_EQ(h5::read_f64_attribute(g, "q0.5", path, "load"), 2.0);
        EXPECT_EQ(h5::read_f64_attribute(g, "mean", path, "load"), 2.0);
        EXPECT_EQ(h5::read_string_attribute(g, "origin", path, "load"), record.measures[0].origin);
    }
    EXPECT_TRUE(h5::exists(f, "/summary/measures/load/given/1"));
    EXPECT_TRUE(h5::exists(f, "/summary/measures/waiting%2Fhour 100%25/tail"));
    EXPECT_TRUE(h5::exists(f, "/summary/events/lost%2Farrival"));
    EXPECT_TRUE(h5::exists(f, "/summary/probabilities/values"));
    // A variable named like a fixed dataset of the group does not replace it.
    EXPECT_TRUE(h5::exists(f, "/summary/likely_states/%69ndex"));
    {
        h5::Handle d = h5::open_dataset(f, "/summary/likely_states/index", path);
        EXPECT_EQ(h5::read_range<std::uint64_t>(d, 0, 2, h5::Access::serial, path, "index"),
                  (std::vector<std::uint64_t>{3, 2}));
    }
    {
        h5::Handle g = h5::open_group(f, "/summary/events/arrive", path);
        EXPECT_EQ(h5::read_f64_attribute(g, "rate", path, "arrive"), 1.5);
    }
    f.close();
    EXPECT_EQ(io::read_result_distribution(path), distribution);
    // Everything else came across as it was, attributes of every type included.
    const io::ResultInfo info = io::read_result_info(path);
    EXPECT_EQ(info.origin.chain_path, "chains/queue.h5");
    EXPECT_EQ(info.origin.chain_bytes, 123456u);
    EXPECT_EQ(info.origin.chain_mtime, 1700000000);
    EXPECT_EQ(info.certificate.trace, result_content().certificate.trace);
    EXPECT_EQ(info.certificate.ranks, 3);
    EXPECT_EQ(info.history.size(), 3u);

    // Replaced parts leave no unused space behind: the same summary again gives
    // a file of the same size.
    const auto size = fs::file_size(path);
    io::write_summary(path, record);
    EXPECT_EQ(fs::file_size(path), size);

    // A second summary replaces the first, parts absent now included.
    io::SummaryRecord smaller;
    smaller.rate_unit = "per step";
    smaller.probabilities = {{"p", "x==1", 0.5}};
    io::write_summary(path, smaller);
    expect_same(io::read_summary(path), smaller);
    h5::Handle again = h5::open_for_reading(path, std::nullopt);
    EXPECT_FALSE(h5::exists(again, "/summary/measures/load"));
    EXPECT_FALSE(h5::exists(again, "/summary/events/arrive"));
    EXPECT_TRUE(h5::exists(again, "/summary/variables/n"));
}

TEST_F(ChainParts, ResultInfoReadsTheSmallParts) {
    const std::string path = write_result(folder, "info");
    const io::ResultInfo info = io::read_result_info(path);
    const io::ResultContent expected = result_content();
    EXPECT_EQ(info.path, path);
    EXPECT_EQ(info.origin.chain_path, expected.origin.chain_path);
    EXPECT_EQ(info.origin.chain_bytes, expected.origin.chain_bytes);
    EXPECT_EQ(info.origin.chain_mtime, expected.origin.chain_mtime);
    EXPECT_EQ(info.origin.kind, "ctmc");
    EXPECT_EQ(info.origin.chain_hash, expected.origin.chain_hash);
    EXPECT_EQ(info.origin.chain_hash_method, expected.origin.chain_hash_method);
    const auto& c = info.certificate;
    EXPECT_EQ(c.method, "linear");
    EXPECT_EQ(c.residual, 3.5e-13);
    EXPECT_EQ(c.tolerance, 1e-10);
    EXPECT_EQ(c.residual_definition, expected.certificate.residual_definition);
    EXPECT_TRUE(c.converged);
    EXPECT_EQ(c.iterations, 17u);
    EXPECT_EQ(c.wall_seconds, 0.25);
    EXPECT_EQ(c.ranks, 3);
    EXPECT_EQ(c.trace, expected.certificate.trace);
    ASSERT_EQ(info.history.size(), 3u);
    EXPECT_EQ(info.history[0].name, "1-power");
    EXPECT_EQ(info.history[1].name, "2-linear");
    EXPECT_EQ(info.history[2].name, "10-gth"); // by attempt, not alphabetically
    EXPECT_EQ(info.history[1].residuals, expected.history[1].residuals);
    EXPECT_TRUE(info.has_distribution);
    EXPECT_EQ(info.states, 4u);
}

TEST_F(ChainParts, ResultInfoRefusesWhatIsNoResult) {
    const std::string chain = folder + "/plain-r" + std::to_string(world_rank()) + ".h5";
    io::write_chain_file(chain, chain_with_parts(3));
    expect_error<InputError>([&] { io::read_result_info(chain); },
                             {chain, "not a longrun result file"});
    const std::string path = write_result(folder, "damaged");
    {
        h5::Handle f(H5Fopen(path.c_str(), H5F_ACC_RDWR, H5P_DEFAULT), H5Fclose);
        h5::Handle g = h5::open_group(f, "/certificate", path);
        EXPECT_GE(H5Adelete(g, "residual"), 0);
    }
    expect_error<InputError>([&] { io::read_result_info(path); }, {path, "residual", "missing"});
}

std::vector<std::string> leftovers(const std::string& folder, const std::string& stem) {
    std::vector<std::string> out;
    for (const auto& e : fs::directory_iterator(folder))
        if (e.path().filename().string().rfind("." + stem, 0) == 0)
            out.push_back(e.path().string());
    return out;
}

TEST_F(ChainParts, FailedSummaryWriteLeavesTheResultAlone) {
    const std::string rank = std::to_string(world_rank());
    // Not a result file: refused before anything is copied.
    const std::string chain = folder + "/chain-r" + rank + ".h5";
    io::write_chain_file(chain, chain_with_parts(3));
    const std::string chain_bytes = slurp(chain);
    expect_error<InputError>([&] { io::write_summary(chain, summary_record()); },
                             {chain, "not a longrun result file"});
    EXPECT_EQ(slurp(chain), chain_bytes);

    // A fault halfway through (the first measure is already in the copy).
    const std::string path = write_result(folder, "half");
    io::write_summary(path, summary_record());
    const std::string before = slurp(path);
    io::SummaryRecord broken = summary_record();
    broken.measures[1].name.clear();
    expect_error<OutputError>([&] { io::write_summary(path, broken); },
                              {path, "empty name", "unchanged"});
    EXPECT_EQ(slurp(path), before);
    EXPECT_EQ(leftovers(folder, "half-r" + rank), std::vector<std::string>{});

    // A folder where nothing can be created (root may write anyway: not then).
    if (::geteuid() != 0) {
        const std::string locked = folder + "/locked-" + rank;
        fs::create_directories(locked);
        const std::string inside = write_result(locked, "result");
        const std::string bytes = slurp(inside);
        fs::permissions(locked, fs::perms::owner_read | fs::perms::owner_exec);
        expect_error<OutputError>([&] { io::write_summary(inside, summary_record()); },
                                  {inside, "cannot create a temporary file", "unchanged"});
        fs::permissions(locked, fs::perms::owner_all);
        EXPECT_EQ(slurp(inside), bytes);
    }
}

} // namespace

// longrun-family: writes chain files (schema v1) for scalable model families, so
// that tests and benchmarks can ask for "the same chain, ten times bigger".
//
// Every family emits its CSR rows directly in state order into preallocated
// arrays: at 10^7 states a triples-then-sort pass would double the memory and
// dominate the run time. Random families use their own integer and real
// distributions on top of std::mt19937_64, because the std:: distributions are
// allowed to differ between standard libraries and a seed must mean the same
// chain everywhere.

#include "io/chain.hpp"
#include "io/chain_file.hpp"
#include "io/error.hpp"
#include "io/hdf5.hpp"

#include <CLI/CLI.hpp>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <functional>
#include <iostream>
#include <limits>
#include <new>
#include <random>
#include <string>
#include <vector>

namespace {

using longrun::io::Chain;
using longrun::io::ChainKind;
using longrun::io::Measure;
using longrun::io::StateVariable;
using u64 = std::uint64_t;

class Random {
  public:
    explicit Random(u64 seed) : engine_(seed) {}

    // Uniform on [0, n) without modulo bias, by multiply-and-reject (D. Lemire,
    // "Fast random integer generation in an interval", ACM TOMACS 29(1), 2019).
    u64 below(u64 n) {
        unsigned __int128 m = static_cast<unsigned __int128>(engine_()) * n;
        auto low = static_cast<u64>(m);
        if (low < n) {
            const u64 threshold = (0 - n) % n;
            while (low < threshold) {
                m = static_cast<unsigned __int128>(engine_()) * n;
                low = static_cast<u64>(m);
            }
        }
        return static_cast<u64>(m >> 64);
    }

    // Uniform on [0, 1) with the 53 bits a double can hold.
    double unit() { return static_cast<double>(engine_() >> 11) * 0x1.0p-53; }
    double between(double a, double b) { return a + (b - a) * unit(); }

  private:
    std::mt19937_64 engine_;
};

u64 checked_product(u64 a, u64 b, const char* what) {
    if (a != 0 && b > std::numeric_limits<u64>::max() / a)
        throw longrun::UsageError(std::string(what) + " overflows 64 bits");
    return a * b;
}

// A chain whose arrays already have their final sizes, so that rows are written
// by index; `transitions` may be an upper bound that finish() trims.
Chain sized_chain(ChainKind kind, u64 states, u64 transitions, bool with_events) {
    Chain c;
    c.kind = kind;
    c.states = states;
    c.rows = {0, states};
    c.offsets.assign(states + 1, 0);
    c.targets.resize(transitions);
    c.weights.resize(transitions);
    if (with_events)
        c.events.resize(transitions);
    return c;
}

void finish(Chain& c) {
    const u64 used = c.offsets.back();
    c.targets.resize(used);
    c.weights.resize(used);
    if (!c.events.empty())
        c.events.resize(used);
    c.transitions = used;
}

StateVariable integral_variable(std::string name, u64 states, double lower, double upper) {
    StateVariable v;
    v.name = std::move(name);
    v.integral = true;
    v.values.resize(states);
    v.lower = lower;
    v.upper = upper;
    return v;
}

class RowWriter {
  public:
    explicit RowWriter(Chain& c) : c_(c) {}
    void put(u64 target, double weight, std::uint16_t event = 0) {
        c_.targets[k_] = target;
        c_.weights[k_] = weight;
        if (!c_.events.empty())
            c_.events[k_] = event;
        ++k_;
    }
    void end_row(u64 row) { c_.offsets[row + 1] = k_; }
    u64 written() const noexcept { return k_; }

  private:
    Chain& c_;
    u64 k_ = 0;
};

// ---------------------------------------------------------------------------

struct TandemOptions {
    u64 n1 = 1001, n2 = 1001;
    double arrival = 1.0, service1 = 1.1, service2 = 1.2;
};

Chain tandem(const TandemOptions& o) {
    const u64 n1 = o.n1, n2 = o.n2;
    const u64 states = checked_product(n1, n2, "--n1 * --n2");
    const u64 arrivals = (n1 - 1) * n2;
    const u64 moves = (n1 - 1) * (n2 - 1);
    const u64 departures = n1 * (n2 - 1);
    Chain c = sized_chain(ChainKind::ctmc, states, arrivals + moves + departures, true);
    c.event_names = {"arrive", "move", "depart"};
    enum : std::uint16_t { arrive, move, depart };

    StateVariable q1 = integral_variable("q1", states, 0, static_cast<double>(n1 - 1));
    StateVariable q2 = integral_variable("q2", states, 0, static_cast<double>(n2 - 1));
    Measure in_system{"in_system", std::vector<double>(states)};

    RowWriter row(c);
    for (u64 x1 = 0; x1 < n1; ++x1) {
        for (u64 x2 = 0; x2 < n2; ++x2) {
            const u64 s = x1 * n2 + x2;
            // Targets come out increasing: a move and a departure can coexist only
            // when 1 <= x2 <= n2 - 2, so n2 >= 3 and s - n2 + 1 < s - 1 < s + n2.
            if (x1 > 0 && x2 + 1 < n2)
                row.put(s - n2 + 1, o.service1, move);
            if (x2 > 0)
                row.put(s - 1, o.service2, depart);
            if (x1 + 1 < n1)
                row.put(s + n2, o.arrival, arrive);
            row.end_row(s);
            q1.values[s] = static_cast<double>(x1);
            q2.values[s] = static_cast<double>(x2);
            in_system.values[s] = static_cast<double>(x1 + x2);
        }
    }
    finish(c);
    c.variables = {std::move(q1), std::move(q2)};
    c.measures = {std::move(in_system)};
    return c;
}

// ---------------------------------------------------------------------------

struct MmckOptions {
    u64 servers = 4, capacity = 100;
    double arrival = 3.0, service = 1.0;
};

Chain mmck(const MmckOptions& o) {
    const u64 k = o.capacity;
    if (k == std::numeric_limits<u64>::max())
        throw longrun::UsageError("--capacity is too large");
    const u64 states = k + 1;
    Chain c = sized_chain(ChainKind::ctmc, states, checked_product(2, k, "2 * --capacity"), true);
    c.event_names = {"arrive", "depart"};
    enum : std::uint16_t { arrive, depart };
    StateVariable n = integral_variable("n", states, 0, static_cast<double>(k));

    RowWriter row(c);
    for (u64 s = 0; s < states; ++s) {
        if (s > 0)
            row.put(s - 1, static_cast<double>(std::min(s, o.servers)) * o.service, depart);
        if (s < k)
            row.put(s + 1, o.arrival, arrive);
        row.end_row(s);
        n.values[s] = static_cast<double>(s);
    }
    finish(c);
    c.variables = {std::move(n)};
    return c;
}

// ---------------------------------------------------------------------------

struct GraphWalkOptions {
    u64 nodes = 1000;
    double degree = 6;
    u64 seed = 1;
};

Chain graph_walk(const GraphWalkOptions& o) {
    const u64 n = o.nodes;
    if (o.degree > static_cast<double>(n - 1))
        throw longrun::UsageError("--degree must be at most nodes - 1 = " + std::to_string(n - 1));
    const auto chords = static_cast<u64>(std::llround((o.degree - 2) * static_cast<double>(n) / 2));

    // The chords are drawn twice from the same seed (once to count, once to
    // place) instead of being stored: at 10^7 nodes the list would cost as much
    // as the matrix itself.
    const auto each_chord = [&](auto&& visit) {
        Random rng(o.seed);
        for (u64 k = 0; k < chords; ++k) {
            const u64 a = rng.below(n);
            u64 b = rng.below(n - 1);
            if (b >= a)
                ++b;
            visit(a, b);
        }
    };

    Chain c;
    c.kind = ChainKind::dtmc;
    c.states = n;
    c.rows = {0, n};
    c.offsets.assign(n + 1, 2); // the ring's two neighbours
    c.offsets[0] = 0;
    each_chord([&](u64 a, u64 b) {
        ++c.offsets[a + 1];
        ++c.offsets[b + 1];
    });
    for (u64 i = 0; i < n; ++i)
        c.offsets[i + 1] += c.offsets[i];
    c.targets.resize(c.offsets[n]);

    // Fill with offsets[i] as row i's cursor; afterwards offsets[i] holds the end
    // of row i, which is shifted back below.
    const auto place = [&](u64 from, u64 to) { c.targets[c.offsets[from]++] = to; };
    for (u64 i = 0; i < n; ++i) {
        place(i, i == 0 ? n - 1 : i - 1);
        place(i, i + 1 == n ? 0 : i + 1);
    }
    each_chord([&](u64 a, u64 b) {
        place(a, b);
        place(b, a);
    });
    for (u64 i = n; i > 0; --i)
        c.offsets[i] = c.offsets[i - 1];
    c.offsets[0] = 0;

    // Repeated chords (and chords that repeat a ring edge) show up in both
    // endpoints' rows, so per-row deduplication keeps the graph symmetric.
    u64 write = 0;
    u64 read_begin = 0;
    for (u64 i = 0; i < n; ++i) {
        const u64 read_end = c.offsets[i + 1];
        auto first = c.targets.begin() + static_cast<std::ptrdiff_t>(read_begin);
        auto last = c.targets.begin() + static_cast<std::ptrdiff_t>(read_end);
        std::sort(first, last);
        last = std::unique(first, last);
        const auto kept = static_cast<u64>(last - first);
        std::copy(first, last, c.targets.begin() + static_cast<std::ptrdiff_t>(write));
        write += kept;
        c.offsets[i + 1] = write;
        read_begin = read_end;
    }
    c.targets.resize(write);
    c.targets.shrink_to_fit();
    c.weights.resize(write);
    c.transitions = write;

    StateVariable degree = integral_variable("degree", n, 2, static_cast<double>(n - 1));
    for (u64 i = 0; i < n; ++i) {
        const u64 d = c.offsets[i + 1] - c.offsets[i];
        std::fill(c.weights.begin() + static_cast<std::ptrdiff_t>(c.offsets[i]),
                  c.weights.begin() + static_cast<std::ptrdiff_t>(c.offsets[i + 1]),
                  1.0 / static_cast<double>(d));
        degree.values[i] = static_cast<double>(d);
    }
    c.variables = {std::move(degree)};
    return c;
}

// ---------------------------------------------------------------------------

struct NcdOptions {
    u64 blocks = 100, block_size = 100, chords = 2;
    double coupling = 1e-4;
    u64 seed = 1;
};

Chain ncd(const NcdOptions& o) {
    const u64 b_count = o.blocks, size = o.block_size;
    const u64 states = checked_product(b_count, size, "--blocks * --block-size");
    const u64 local = size > 1 ? 1 + o.chords : 0;
    const u64 bound = checked_product(states, local + 1, "the number of transitions");
    Chain c = sized_chain(ChainKind::ctmc, states, bound, true);
    c.event_names = {"local", "cross"};
    enum : std::uint16_t { inside, cross };
    StateVariable block = integral_variable("block", states, 0, static_cast<double>(b_count - 1));
    StateVariable within = integral_variable("within", states, 0, static_cast<double>(size - 1));

    Random rng(o.seed);
    struct Entry {
        u64 target;
        double rate;
        std::uint16_t event;
    };
    std::vector<Entry> entries;
    entries.reserve(local + 1);
    RowWriter row(c);
    for (u64 b = 0; b < b_count; ++b) {
        const u64 base = b * size;
        const u64 next_base = (b + 1 == b_count ? 0 : b + 1) * size;
        for (u64 w = 0; w < size; ++w) {
            entries.clear();
            if (size > 1) {
                entries.push_back(
                    {base + (w + 1 == size ? 0 : w + 1), rng.between(0.5, 1.5), inside});
                for (u64 j = 0; j < o.chords; ++j) {
                    u64 t = rng.below(size - 1);
                    if (t >= w)
                        ++t;
                    entries.push_back({base + t, rng.between(0.5, 1.5), inside});
                }
            }
            entries.push_back(
                {next_base + rng.below(size), o.coupling * rng.between(0.5, 1.5), cross});
            std::sort(entries.begin(), entries.end(),
                      [](const Entry& x, const Entry& y) { return x.target < y.target; });
            // A chord that lands on an existing target adds its rate to it: two
            // ways to make the same jump are one faster jump.
            for (std::size_t i = 0; i < entries.size(); ++i) {
                double rate = entries[i].rate;
                while (i + 1 < entries.size() && entries[i + 1].target == entries[i].target)
                    rate += entries[++i].rate;
                row.put(entries[i].target, rate, entries[i].event);
            }
            const u64 s = base + w;
            row.end_row(s);
            block.values[s] = static_cast<double>(b);
            within.values[s] = static_cast<double>(w);
        }
    }
    finish(c);
    c.variables = {std::move(block), std::move(within)};
    return c;
}

// ---------------------------------------------------------------------------

struct Common {
    std::string output;
    longrun::h5::Layout layout;
};

void add_common(CLI::App* sub, Common& common) {
    sub->add_option("-o,--output", common.output, "chain file to write (HDF5, schema v1)")
        ->required();
    sub->add_option("--chunk", common.layout.chunk,
                    "HDF5 chunk length in elements for every dataset (0: longrun's default)")
        ->capture_default_str();
    sub->add_option("--deflate", common.layout.deflate, "deflate level 1-9 (0: none)")
        ->check(CLI::Range(0, 9))
        ->capture_default_str();
    sub->add_flag("--no-checksum{false}", common.layout.checksum,
                  "no Fletcher32 checksums (to measure what they cost); with neither --chunk "
                  "nor --deflate the datasets are then contiguous");
}

const CLI::Validator positive_rate(
    [](std::string& text) -> std::string {
        try {
            std::size_t used = 0;
            const double v = std::stod(text, &used);
            if (used == text.size() && std::isfinite(v) && v > 0)
                return {};
        } catch (const std::exception&) {
        }
        return "must be a finite number > 0, got '" + text + "'";
    },
    "RATE>0");

CLI::Validator at_least(u64 least) {
    return CLI::Validator(
        [least](std::string& text) -> std::string {
            u64 v = 0;
            if (CLI::detail::lexical_cast(text, v) && v >= least)
                return {};
            return "must be an integer >= " + std::to_string(least) + ", got '" + text + "'";
        },
        "INT>=" + std::to_string(least));
}

const char* const overview =
    R"(Writes chain files (longrun.chain schema v1) for scalable model families,
from a handful of states up to about 10^7, for tests and benchmarks.
Every family is irreducible, so it has a unique stationary distribution.
Run 'longrun-family FAMILY --help' for the family's model and state numbering.
The last line printed is
  family=NAME states=N transitions=M file=PATH seconds=T)";

const char* const tandem_help =
    R"(Continuous-time tandem line of two single-server stations with finite buffers.
State (q1, q2): q1 in 0..N1-1 jobs at station 1, q2 in 0..N2-1 at station 2,
numbered lexicographically: index = q1 * N2 + q2 (so --n1 1001 --n2 1001 gives
1,002,001 states).
Events:  arrive  q1+1 at rate L when q1 < N1-1 (arrivals to a full station 1
                 are lost);
         move    q1-1, q2+1 at rate M1 when q1 > 0 and q2 < N2-1; station 1
                 does not serve while station 2 is full (blocking before
                 service: a finished job never waits at station 1);
         depart  q2-1 at rate M2 when q2 > 0.
State variables q1, q2 (bounds 0..N-1); measure in_system = q1 + q2.
The defaults put the loads at L/M1 = 0.91 and L/M2 = 0.83.)";

const char* const mmck_help =
    R"(M/M/c/K birth-death queue (continuous time): C servers, room for K jobs.
State n = number of jobs in the system, index = n, n in 0..K.
Events:  arrive  n+1 at rate L when n < K (arrivals to a full system are lost);
         depart  n-1 at rate min(n, C) * M when n > 0.
State variable n (bounds 0..K). Its stationary law has a closed form, which
makes it a check value for solvers.)";

const char* const graph_walk_help =
    R"(Simple random walk (discrete time) on a random connected undirected graph.
Nodes 0..N-1 (index = node) lie on a ring, which keeps the graph connected;
round((D-2) N / 2) random chords with uniform endpoints are added, without
self-loops; repeated edges are merged, so the average degree is about D (less
when chords collide, which matters only for dense graphs). From node i the walk
moves to each of its deg(i) neighbours with probability 1/deg(i). The stationary law is
pi_i = deg(i) / (2|E|) (Levin, Peres and Wilmer, Markov Chains and Mixing Times,
Sec. 1.5). With D = 2 and N even the walk has period 2.
The same --seed gives the same graph on every platform.
State variable degree.)";

const char* const ncd_help =
    R"(Nearly completely decomposable chain (continuous time): B blocks of S states.
State (block, within), index = block * S + within.
Inside each block: a directed ring within -> within+1 (mod S) plus C random
chords per state to other states of the same block (event local), rates
uniform on [0.5, 1.5]; jumps to the same target are merged by adding rates.
Between blocks: every state has one jump to a uniformly chosen state of the
next block (block+1 mod B) at rate EPS * U(0.5, 1.5) (event cross).
Small EPS clusters B eigenvalues near 0, which defeats plain Krylov methods.
The same --seed gives the same chain on every platform.
State variables block (0..B-1) and within (0..S-1).)";

int run(int argc, char** argv) {
    CLI::App app{overview, "longrun-family"};
    app.require_subcommand(1);
    Common common;
    std::function<Chain()> build;
    std::string family;

    TandemOptions t;
    auto* tandem_cmd = app.add_subcommand("tandem", "two-station tandem line with finite buffers");
    tandem_cmd->footer(tandem_help);
    tandem_cmd->add_option("--n1", t.n1, "N1: states of station 1 (capacity N1-1)")
        ->check(at_least(2))
        ->capture_default_str();
    tandem_cmd->add_option("--n2", t.n2, "N2: states of station 2 (capacity N2-1)")
        ->check(at_least(2))
        ->capture_default_str();
    tandem_cmd->add_option("--arrival", t.arrival, "L: arrival rate")
        ->check(positive_rate)
        ->capture_default_str();
    tandem_cmd->add_option("--service1", t.service1, "M1: service rate of station 1")
        ->check(positive_rate)
        ->capture_default_str();
    tandem_cmd->add_option("--service2", t.service2, "M2: service rate of station 2")
        ->check(positive_rate)
        ->capture_default_str();
    add_common(tandem_cmd, common);
    tandem_cmd->callback([&] {
        family = "tandem";
        build = [&] { return tandem(t); };
    });

    MmckOptions m;
    auto* mmck_cmd = app.add_subcommand("mmck", "M/M/c/K birth-death queue");
    mmck_cmd->footer(mmck_help);
    mmck_cmd->add_option("--servers", m.servers, "C: number of servers")
        ->check(at_least(1))
        ->capture_default_str();
    mmck_cmd->add_option("--capacity", m.capacity, "K: most jobs in the system")
        ->check(at_least(1))
        ->capture_default_str();
    mmck_cmd->add_option("--arrival", m.arrival, "L: arrival rate")
        ->check(positive_rate)
        ->capture_default_str();
    mmck_cmd->add_option("--service", m.service, "M: service rate of one server")
        ->check(positive_rate)
        ->capture_default_str();
    add_common(mmck_cmd, common);
    mmck_cmd->callback([&] {
        family = "mmck";
        build = [&] { return mmck(m); };
    });

    GraphWalkOptions g;
    auto* walk_cmd = app.add_subcommand("graph-walk", "random walk on a random connected graph");
    walk_cmd->footer(graph_walk_help);
    walk_cmd->add_option("--nodes", g.nodes, "N: number of nodes (states)")
        ->check(at_least(3))
        ->capture_default_str();
    walk_cmd->add_option("--degree", g.degree, "D: average degree, 2 <= D <= N-1")
        ->check(CLI::Validator(
            [](std::string& text) -> std::string {
                double v = 0;
                if (CLI::detail::lexical_cast(text, v) && v >= 2 && std::isfinite(v))
                    return {};
                return "must be a number >= 2, got '" + text + "'";
            },
            "D>=2"))
        ->capture_default_str();
    walk_cmd->add_option("--seed", g.seed, "seed of the graph")->capture_default_str();
    add_common(walk_cmd, common);
    walk_cmd->callback([&] {
        family = "graph-walk";
        build = [&] { return graph_walk(g); };
    });

    NcdOptions d;
    auto* ncd_cmd = app.add_subcommand("ncd", "nearly completely decomposable chain");
    ncd_cmd->footer(ncd_help);
    ncd_cmd->add_option("--blocks", d.blocks, "B: number of blocks")
        ->check(at_least(2))
        ->capture_default_str();
    ncd_cmd->add_option("--block-size", d.block_size, "S: states per block")
        ->check(at_least(1))
        ->capture_default_str();
    ncd_cmd->add_option("--chords", d.chords, "C: random chords per state inside its block")
        ->check(CLI::Range(u64{0}, u64{1000}))
        ->capture_default_str();
    ncd_cmd->add_option("--coupling", d.coupling, "EPS: scale of the rates between blocks")
        ->check(positive_rate)
        ->capture_default_str();
    ncd_cmd->add_option("--seed", d.seed, "seed of the chain")->capture_default_str();
    add_common(ncd_cmd, common);
    ncd_cmd->callback([&] {
        family = "ncd";
        build = [&] { return ncd(d); };
    });

    try {
        app.parse(argc, argv);
    } catch (const CLI::CallForHelp& e) {
        return app.exit(e);
    } catch (const CLI::CallForAllHelp& e) {
        return app.exit(e);
    } catch (const CLI::ParseError& e) {
        (void)app.exit(e);
        return static_cast<int>(longrun::ExitCode::usage);
    }
    const auto start = std::chrono::steady_clock::now();
    const Chain chain = build();
    longrun::io::write_chain_file(common.output, chain, common.layout);
    const std::chrono::duration<double> elapsed = std::chrono::steady_clock::now() - start;
    std::printf("family=%s states=%llu transitions=%llu file=%s seconds=%.3f\n", family.c_str(),
                static_cast<unsigned long long>(chain.states),
                static_cast<unsigned long long>(chain.transitions), common.output.c_str(),
                elapsed.count());
    return 0;
}

} // namespace

int main(int argc, char** argv) {
    try {
        return run(argc, argv);
    } catch (const longrun::Error& e) {
        std::cerr << "longrun-family: " << e.what() << '\n';
        return static_cast<int>(e.code());
    } catch (const std::bad_alloc&) {
        std::cerr << "longrun-family: not enough memory for a chain of this size\n";
        return static_cast<int>(longrun::ExitCode::output_failed);
    }
}

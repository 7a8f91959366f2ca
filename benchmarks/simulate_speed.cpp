// longrun-simulate-speed: transitions per second of one simulation replication
// on a chain held in memory (a two-station tandem line built here, or a chain
// file), on one core.

#include "io/chain.hpp"
#include "io/chain_file.hpp"
#include "simulate/sampler.hpp"
#include "simulate/simulation.hpp"

#include <CLI/CLI.hpp>
#include <mpi.h>

#include <algorithm>
#include <chrono>
#include <cstdint>
#include <cstdio>
#include <ctime>
#include <optional>
#include <random>
#include <string>
#include <vector>

namespace {

using longrun::io::Chain;
using u64 = std::uint64_t;

// Tandem line, state (x1, x2) -> x1 * n2 + x2: arrivals to station 1 (buffer
// n1 - 1), service 1 moves a job to station 2 (buffer n2 - 1), service 2 ends it.
Chain tandem(u64 n1, u64 n2, double lambda, double mu1, double mu2) {
    Chain c;
    c.kind = longrun::io::ChainKind::ctmc;
    c.states = n1 * n2;
    c.rows = {0, c.states};
    c.offsets.assign(1, 0);
    longrun::io::StateVariable q1{"q1", true, {}, 0.0, double(n1 - 1)};
    longrun::io::StateVariable q2{"q2", true, {}, 0.0, double(n2 - 1)};
    for (u64 a = 0; a < n1; ++a)
        for (u64 b = 0; b < n2; ++b) {
            // Targets in increasing order, as the chain file requires.
            if (a > 0 && b + 1 < n2) {
                c.targets.push_back((a - 1) * n2 + b + 1);
                c.weights.push_back(mu1);
            }
            if (b > 0) {
                c.targets.push_back(a * n2 + b - 1);
                c.weights.push_back(mu2);
            }
            if (a + 1 < n1) {
                c.targets.push_back((a + 1) * n2 + b);
                c.weights.push_back(lambda);
            }
            c.offsets.push_back(c.targets.size());
            q1.values.push_back(double(a));
            q2.values.push_back(double(b));
        }
    c.transitions = c.targets.size();
    c.variables = {q1, q2};
    return c;
}

// A ctmc whose rows have `degree` random targets and random rates: long rows,
// where the choice of sampling table matters most.
Chain random_rows(u64 states, u64 degree, u64 seed) {
    std::mt19937_64 g(seed);
    Chain c;
    c.kind = longrun::io::ChainKind::ctmc;
    c.states = states;
    c.rows = {0, states};
    c.offsets.assign(1, 0);
    std::vector<u64> row;
    for (u64 s = 0; s < states; ++s) {
        row.clear();
        for (u64 k = 0; k < degree; ++k)
            row.push_back(g() % states);
        std::sort(row.begin(), row.end());
        row.erase(std::unique(row.begin(), row.end()), row.end());
        for (u64 t : row) {
            c.targets.push_back(t);
            c.weights.push_back(0.1 + double(g() >> 11) * 0x1.0p-53);
        }
        c.offsets.push_back(c.targets.size());
    }
    c.transitions = c.targets.size();
    return c;
}

// The alternative to the library's cumulative weights, kept here to compare:
// Walker's alias method (A. J. Walker, ACM Transactions on Mathematical
// Software 3(3), 1977) with Vose's linear-time construction (M. D. Vose, IEEE
// Transactions on Software Engineering 17(9), 1991), one table per row, laid
// out as the library's tables are: a packed record per state, one 32-byte slot
// per outcome. For ctmc rows (the chains built here).
struct AliasRows {
    struct Record {
        u64 first;
        u64 count;
    };
    struct alignas(32) Slot {
        double keep;
        u64 own, alias;
    };
    std::vector<Record> rows;
    std::vector<Slot> slots;

    explicit AliasRows(const Chain& c) : rows(c.states), slots(c.targets.size()) {
        std::vector<u64> small, large;
        std::vector<double> scaled;
        for (u64 s = 0; s < c.states; ++s) {
            const u64 first = c.offsets[s], d = c.offsets[s + 1] - first;
            rows[s] = {first, d};
            double total = 0;
            for (u64 k = first; k < first + d; ++k)
                total += c.weights[k];
            scaled.assign(d, 0);
            small.clear();
            large.clear();
            for (u64 j = 0; j < d; ++j) {
                scaled[j] = c.weights[first + j] / total * double(d);
                (scaled[j] < 1 ? small : large).push_back(j);
            }
            while (!small.empty() && !large.empty()) {
                const u64 a = small.back(), b = large.back();
                small.pop_back();
                slots[first + a] = {scaled[a], c.targets[first + a], c.targets[first + b]};
                scaled[b] -= 1 - scaled[a];
                if (scaled[b] < 1) {
                    large.pop_back();
                    small.push_back(b);
                }
            }
            for (u64 j : large)
                slots[first + j] = {1.0, c.targets[first + j], c.targets[first + j]};
            for (u64 j : small) // full up to rounding
                slots[first + j] = {1.0, c.targets[first + j], c.targets[first + j]};
        }
    }
    u64 next(u64 s, double u) const noexcept {
        const Record r = rows[s];
        const double x = u * double(r.count);
        const u64 j = std::min<u64>(u64(x), r.count - 1);
        const Slot& slot = slots[r.first + j];
        return x - double(j) < slot.keep ? slot.own : slot.alias;
    }
};

// Next-state draws along one path, nothing else: the library's cumulative
// weights (Sampler) against alias tables, same uniforms.
void compare_samplers(const Chain& chain, u64 draws) {
    const longrun::simulate::Sampler cumulative(chain);
    const AliasRows alias(chain);
    auto run = [&](auto&& next, const char* name) {
        std::mt19937_64 g(1);
        u64 s = 0, sum = 0;
        const std::clock_t start = std::clock();
        for (u64 i = 0; i < draws; ++i) {
            s = next(s, double(g() >> 11) * 0x1.0p-53);
            sum += s;
        }
        const double cpu = double(std::clock() - start) / CLOCKS_PER_SEC;
        std::printf("  %-22s %.3g draws/s (cpu)   [checksum %llu]\n", name, double(draws) / cpu,
                    static_cast<unsigned long long>(sum % 1000));
    };
    run([&](u64 s, double u) { return cumulative.pick(s, u).target; }, "cumulative + search");
    run([&](u64 s, double u) { return alias.next(s, u); }, "alias (Walker/Vose)");
}

} // namespace

int main(int argc, char** argv) {
    MPI_Init(&argc, &argv);
    CLI::App app{"Transitions per second of one simulation replication on one core"};
    std::string file;
    u64 n1 = 1000, n2 = 1000, steps = 100'000'000, seed = 1;
    double lambda = 1.0, mu1 = 1.1, mu2 = 1.2;
    app.add_option("--file", file, "a chain file (default: a tandem line built in memory)");
    app.add_option("--n1", n1, "tandem: states of station 1")->capture_default_str();
    app.add_option("--n2", n2, "tandem: states of station 2")->capture_default_str();
    app.add_option("--arrival", lambda)->capture_default_str();
    app.add_option("--service1", mu1)->capture_default_str();
    app.add_option("--service2", mu2)->capture_default_str();
    app.add_option("--steps", steps, "transitions to simulate")->capture_default_str();
    app.add_option("--seed", seed)->capture_default_str();
    u64 random_degree = 0;
    app.add_option("--random-rows", random_degree,
                   "simulate a ctmc of n1 * n2 states with random rows of this many entries "
                   "instead of the tandem line");
    u64 compare_degree = 0;
    app.add_option("--compare-samplers", compare_degree,
                   "instead: time next-state draws alone, cumulative weights against alias "
                   "tables, on the tandem line and on random rows of this many entries");
    try {
        app.parse(argc, argv);
    } catch (const CLI::ParseError& e) {
        const int code = app.exit(e);
        MPI_Finalize();
        return code;
    }
    if (compare_degree > 0) {
        std::printf("tandem line %llu x %llu:\n", static_cast<unsigned long long>(n1),
                    static_cast<unsigned long long>(n2));
        compare_samplers(tandem(n1, n2, lambda, mu1, mu2), steps);
        std::printf("random rows, %llu states, about %llu entries per row:\n",
                    static_cast<unsigned long long>(n1 * n2),
                    static_cast<unsigned long long>(compare_degree));
        compare_samplers(random_rows(n1 * n2, compare_degree, seed), steps);
        MPI_Finalize();
        return 0;
    }
    const Chain chain = !file.empty()   ? longrun::io::read_whole_chain(file, {})
                        : random_degree ? random_rows(n1 * n2, random_degree, seed)
                                        : tandem(n1, n2, lambda, mu1, mu2);
    longrun::simulate::SimulationSettings settings;
    settings.length.steps = steps;
    settings.seed = seed;
    // A tandem line starts empty; a file's chain at its state 0.
    const auto t0 = std::chrono::steady_clock::now();
    const auto prepared = longrun::simulate::prepare(chain);
    const double setup =
        std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    // CPU time too: on a shared machine the wall time also counts waiting for a core.
    const std::clock_t cpu_start = std::clock();
    const auto r = longrun::simulate::run_replication(*prepared, settings, 0);
    const double cpu = double(std::clock() - cpu_start) / CLOCKS_PER_SEC;
    std::printf("chain: %s, %llu states, %llu transitions (%s)\n",
                !file.empty()   ? file.c_str()
                : random_degree ? "random rows in memory"
                                : "tandem line in memory",
                static_cast<unsigned long long>(chain.states),
                static_cast<unsigned long long>(chain.transitions),
                longrun::io::to_string(chain.kind).c_str());
    std::printf("setup (sampling tables): %.3f s\n", setup);
    std::printf("simulated: %llu transitions in %.3f s wall, %.3f s cpu: %.3g transitions/s "
                "(wall), %.3g (cpu)\n",
                static_cast<unsigned long long>(r.transitions), r.wall_seconds, cpu,
                double(r.transitions) / r.wall_seconds, double(r.transitions) / cpu);
    for (const auto& e : r.estimates)
        std::printf("  %s %s = %.6g +- %.2g (%llu batches)\n", e.kind.c_str(), e.name.c_str(),
                    e.mean, e.half_width, static_cast<unsigned long long>(e.batches));
    MPI_Finalize();
    return 0;
}

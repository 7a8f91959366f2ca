// longrun-partition-cost: what the quality numbers of the rows as read cost, the
// way solve measures them now (straight from each rank's rows: the one-pass
// numbers auto's gate needs, then the edge cut by one exchange of the off-rank
// transitions) against the way it measured them before (symmetrised adjacency,
// then a lookup per neighbour), on the same ranks in the same run, and whether
// both give the same numbers.
//
//   mpirun -n R longrun-partition-cost CHAIN.h5 [--repeat N]
//
// Prints one JSON line (rank 0); times are the slowest rank's, best of N.

#include "cli/load.hpp"
#include "partition/adjacency.hpp"
#include "partition/contiguous.hpp"
#include "partition/contiguous_quality.hpp"
#include "partition/quality.hpp"

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>
#include <petscsys.h>

#include <algorithm>
#include <chrono>
#include <iostream>
#include <limits>

namespace {

using longrun::partition::Quality;

nlohmann::json to_json(const Quality& q) {
    return {{"volume", q.volume},
            {"max_volume", q.max_volume},
            {"off_rank_nonzeros", q.off_rank_nonzeros},
            {"edge_cut", q.edge_cut},
            {"imbalance", q.imbalance},
            {"max_nonzeros", q.max_nonzeros}};
}

bool same(const Quality& a, const Quality& b) {
    return a.volume == b.volume && a.max_volume == b.max_volume &&
           a.off_rank_nonzeros == b.off_rank_nonzeros && a.edge_cut == b.edge_cut &&
           a.max_nonzeros == b.max_nonzeros && a.imbalance == b.imbalance;
}

// The slowest rank's seconds for `work`.
template <class Work>
double timed(MPI_Comm comm, Work&& work) {
    MPI_Barrier(comm);
    const auto start = std::chrono::steady_clock::now();
    work();
    double seconds =
        std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    MPI_Allreduce(MPI_IN_PLACE, &seconds, 1, MPI_DOUBLE, MPI_MAX, comm);
    return seconds;
}

} // namespace

int main(int argc, char** argv) {
    if (PetscInitialize(&argc, &argv, nullptr, nullptr) != 0)
        return 4;
    MPI_Comm comm = PETSC_COMM_WORLD;
    int rank = 0, ranks = 1;
    MPI_Comm_rank(comm, &rank);
    MPI_Comm_size(comm, &ranks);
    CLI::App app{"Times the partition quality numbers of the rows as read, new way and old way",
                 "longrun-partition-cost"};
    std::string chain_path;
    int repeat = 3;
    app.add_option("chain", chain_path, "chain file")->required()->check(CLI::ExistingFile);
    app.add_option("--repeat", repeat, "timed repetitions")->check(CLI::Range(1, 1000));
    try {
        app.parse(argc, argv);
    } catch (const CLI::ParseError& e) {
        const int code = rank == 0 ? app.exit(e) : e.get_exit_code();
        PetscFinalize();
        return code;
    }
    int code = 0;
    try {
        const auto loaded = longrun::cli::load_chain(chain_path, comm, {});
        const auto& chain = loaded.chain;
        const longrun::partition::CsrView csr{chain.states, chain.rows, chain.offsets,
                                              chain.targets};
        const auto ranges = longrun::partition::gather_ranges(comm, chain.rows);
        Quality cheap, full;
        double cheap_best = std::numeric_limits<double>::infinity(), full_best = cheap_best,
               adjacency_best = cheap_best, gate_best = cheap_best;
        for (int r = 0; r < repeat; ++r) {
            const double gate = timed(
                comm, [&] { cheap = longrun::partition::contiguous_quality(comm, csr, ranges); });
            const double cut = timed(comm, [&] {
                cheap.edge_cut = longrun::partition::contiguous_edge_cut(comm, csr, ranges);
            });
            gate_best = std::min(gate_best, gate);
            cheap_best = std::min(cheap_best, gate + cut);
            longrun::partition::Adjacency adjacency;
            const double built = timed(comm, [&] {
                adjacency = longrun::partition::symmetrised_adjacency(comm, csr, ranges);
            });
            const double measured = timed(comm, [&] {
                full = longrun::partition::measure_quality(
                    comm, csr, adjacency, ranges,
                    longrun::partition::parts_in_place(comm, chain.rows));
            });
            adjacency_best = std::min(adjacency_best, built);
            full_best = std::min(full_best, built + measured);
        }
        if (rank == 0)
            std::cout << nlohmann::json{{"chain", chain_path},
                                        {"ranks", ranks},
                                        {"states", chain.states},
                                        {"transitions", chain.transitions},
                                        {"from_rows_gate_s", gate_best},
                                        {"from_rows_with_cut_s", cheap_best},
                                        {"adjacency_s", adjacency_best},
                                        {"adjacency_and_lookup_s", full_best},
                                        {"same_numbers", same(cheap, full)},
                                        {"from_rows", to_json(cheap)},
                                        {"adjacency", to_json(full)}}
                             .dump()
                      << std::endl;
        code = same(cheap, full) ? 0 : 1;
    } catch (const std::exception& e) {
        std::cerr << "longrun-partition-cost: " << e.what() << "\n";
        code = 2;
    }
    PetscFinalize();
    return code;
}

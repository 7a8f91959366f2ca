// Seconds to read a chain file onto the ranks (header, row pointer, each rank's
// slice of every dataset, validation, content hash), as `solve` reads it; and,
// apart, what the content hash alone costs on the slice in memory. Best of
// --repeat runs, so the file is in the page cache after the first: this times
// HDF5 and longrun (checksums, conversion, validation), not the disk.
//
//   mpirun -n 2 longrun-read-speed chain.h5 --repeat 3
#include "io/chain_file.hpp"
#include "io/chain_hash.hpp"
#include "partition/contiguous.hpp"

#include <CLI/CLI.hpp>
#include <mpi.h>
#include <nlohmann/json.hpp>

#include <algorithm>
#include <chrono>
#include <iostream>
#include <limits>

namespace {

template <class Body>
double timed(MPI_Comm comm, Body&& body) {
    MPI_Barrier(comm);
    const auto start = std::chrono::steady_clock::now();
    body();
    MPI_Barrier(comm);
    return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

} // namespace

int main(int argc, char** argv) {
    MPI_Init(&argc, &argv);
    MPI_Comm comm = MPI_COMM_WORLD;
    int rank = 0, ranks = 1;
    MPI_Comm_rank(comm, &rank);
    MPI_Comm_size(comm, &ranks);
    CLI::App app{"Times reading a chain file as solve reads it", "longrun-read-speed"};
    std::string path;
    int repeat = 3;
    app.add_option("chain", path, "chain file")->required()->check(CLI::ExistingFile);
    app.add_option("--repeat", repeat, "timed repetitions")->check(CLI::Range(1, 1000));
    try {
        app.parse(argc, argv);
    } catch (const CLI::ParseError& e) {
        const int code = rank == 0 ? app.exit(e) : e.get_exit_code();
        MPI_Finalize();
        return code;
    }
    int code = 0;
    try {
        double read_best = std::numeric_limits<double>::infinity(), hash_best = read_best;
        longrun::io::Chain chain;
        for (int r = 0; r < repeat; ++r) {
            read_best = std::min(read_best, timed(comm, [&] {
                                     const auto h = longrun::io::read_chain_header(path, comm);
                                     const auto rows =
                                         longrun::partition::even_rows(h.states, ranks, rank);
                                     chain = longrun::io::read_chain_slice(h, rows, comm, {});
                                 }));
            hash_best =
                std::min(hash_best,
                         timed(comm, [&] { (void)longrun::io::chain_content_hash(chain, comm); }));
        }
        if (rank == 0)
            std::cout << nlohmann::json{{"chain", path},
                                        {"ranks", ranks},
                                        {"states", chain.states},
                                        {"transitions", chain.transitions},
                                        {"read_s", read_best},
                                        {"hash_s", hash_best},
                                        {"hash", chain.content_hash}}
                             .dump()
                      << std::endl;
    } catch (const std::exception& e) {
        std::cerr << "longrun-read-speed: " << e.what() << "\n";
        code = 2;
    }
    MPI_Finalize();
    return code;
}

// longrun-bandwidth: how close the sparse product with a chain's matrix comes to
// the machine's streaming bandwidth, on the same ranks in the same run.
//
// The chain is loaded and assembled exactly as `longrun solve` does it (load_chain,
// then assemble_transposed: A = Q^T or P^T, MPIAIJ with the diagonal stored), so
// the product timed here is the one every solver method repeats. The reference is
// the triad a = b + s c of STREAM (J. D. McCalpin, "Memory Bandwidth and Machine
// Balance in Current High Performance Computers", IEEE TCCA Newsletter, Dec. 1995),
// counted as STREAM counts it: 24 bytes per element, no write-allocate traffic.
// Like STREAM, every rate comes from the best of the timed repetitions.

#include "cli/load.hpp"
#include "cli/solve_layout.hpp"
#include "cli/structure_report.hpp"
#include "io/error.hpp"
#include "io/mpi_agree.hpp"
#include "solve/assemble.hpp"
#include "solve/handles.hpp"
#include "solve/petsc_error.hpp"

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>
#include <petscmat.h>

#include <algorithm>
#include <cstdio>
#include <iostream>
#include <memory>
#include <string>
#include <vector>

namespace {

using longrun::solve::check;

constexpr const char* description =
    R"(Times the sparse product y = A x with a chain's matrix against a STREAM triad on
the same ranks, and prints one JSON line.

  mpirun -n R longrun-bandwidth CHAIN.h5 [--repeat N] [--partition P] [-- PETSc options]

A = Q^T (ctmc) or P^T (dtmc), assembled as `longrun solve` assembles it: PETSc
AIJ (MPIAIJ on several ranks), one stored diagonal entry per row.

Byte model of one product (the least traffic any CSR product must cause):
  per nonzero  8 (value) + sizeof(PetscInt) (column index; 4 in this build
               unless PETSc uses 64-bit indices)
  per row      8 (write y) + 8 (read x, each entry once: perfect reuse)
               + sizeof(PetscInt) (row pointer)
Not counted: a second row pointer and the ghost values of the off-diagonal
block that MPIAIJ keeps on more than one rank, the messages between ranks,
and re-reads of x that miss the cache.

Triad a = b + s c (STREAM, McCalpin 1995): 24 bytes per element, counted as
STREAM counts them. Two sizes: "same size" arrays holding as many bytes in
total as this rank's share of the product's byte model (the same cache
regime), and "large" arrays of --triad-mib MiB each per rank (main memory:
on this machine the triad still gains from caches at 3 x 80 MiB).

Each timed repetition runs between barriers, so a rate is the whole
communicator's bytes over the slowest rank's time; rates use the best
repetition (as STREAM does), the median is reported too.

Another matrix format: -bandwidth_mat_type TYPE after '--' converts A after
assembly (e.g. sell, aijperm, aijsell), then -bandwidth_ options reach the
matrix through MatSetFromOptions.)";

struct Options {
    std::string chain;
    int repeat = 50;
    double triad_mib = 256;
    std::string partition = "contiguous";
};

struct Timing {
    double best = 0, median = 0;
};

// Times `work` `repeat` times, each between barriers so that the slowest rank
// counts; one untimed call first warms caches, pages and communication set-up.
template <class Work>
Timing time_repeated(MPI_Comm comm, int repeat, Work&& work) {
    work();
    std::vector<double> seconds;
    seconds.reserve(static_cast<std::size_t>(repeat));
    for (int r = 0; r < repeat; ++r) {
        MPI_Barrier(comm);
        const double start = MPI_Wtime();
        work();
        MPI_Barrier(comm);
        seconds.push_back(MPI_Wtime() - start);
    }
    // Every rank saw the same barrier-to-barrier spans up to clock noise; rank
    // 0's are reported, the maximum keeps a rank with a slow clock honest.
    std::vector<double> slowest(seconds.size());
    MPI_Allreduce(seconds.data(), slowest.data(), static_cast<int>(seconds.size()), MPI_DOUBLE,
                  MPI_MAX, comm);
    std::sort(slowest.begin(), slowest.end());
    return {slowest.front(), slowest[slowest.size() / 2]};
}

struct TriadResult {
    Timing time;
    std::uint64_t elements_per_rank = 0;
    double bytes = 0; // whole communicator, one triad
};

// STREAM's triad on three arrays of `elements` doubles per rank.
TriadResult triad(MPI_Comm comm, std::uint64_t elements, int repeat) {
    elements = std::max<std::uint64_t>(elements, 1);
    // new[] without initialisation, then first touch here, by this rank.
    std::unique_ptr<double[]> a(new double[elements]), b(new double[elements]),
        c(new double[elements]);
    for (std::uint64_t i = 0; i < elements; ++i) {
        a[i] = 1.0;
        b[i] = 2.0;
        c[i] = 0.5;
    }
    const double scalar = 3.0;
    double* __restrict pa = a.get();
    const double* __restrict pb = b.get();
    const double* __restrict pc = c.get();
    TriadResult out;
    out.elements_per_rank = elements;
    out.time = time_repeated(comm, repeat, [&] {
        for (std::uint64_t i = 0; i < elements; ++i)
            pa[i] = pb[i] + scalar * pc[i];
    });
    // A check like STREAM's: a wrong answer means the loop was not what was timed.
    bool right = true;
    for (std::uint64_t i = 0; i < elements; i += 4093)
        right = right && pa[i] == 3.5;
    int local_right = right ? 1 : 0, all_right = 0;
    MPI_Allreduce(&local_right, &all_right, 1, MPI_INT, MPI_MIN, comm);
    if (!all_right) {
        longrun::solve::LibraryError wrong("the triad computed wrong values");
        wrong.mark_agreed();
        throw wrong;
    }
    std::uint64_t total = 0;
    MPI_Allreduce(&elements, &total, 1, MPI_UINT64_T, MPI_SUM, comm);
    out.bytes = 24.0 * static_cast<double>(total);
    return out;
}

// The conversion named by -bandwidth_mat_type, if any; returns the type in use.
std::string apply_requested_format(longrun::solve::MatHandle& a) {
    char requested[256] = "";
    PetscBool given = PETSC_FALSE;
    check(PetscOptionsGetString(nullptr, "bandwidth_", "-mat_type", requested, sizeof requested,
                                &given),
          "PetscOptionsGetString");
    if (given) {
        Mat m = a.get();
        check(MatConvert(m, requested, MAT_INPLACE_MATRIX, &m), "MatConvert");
    }
    check(MatSetOptionsPrefix(a, "bandwidth_"), "MatSetOptionsPrefix");
    MatType type = nullptr;
    check(MatGetType(a, &type), "MatGetType");
    return type ? type : "unknown";
}

int run(MPI_Comm comm, const Options& o) {
    const int rank = longrun::comm_rank(comm), ranks = longrun::comm_size(comm);
    longrun::solve::TransposedChain a;
    nlohmann::json partition;
    {
        // The chain's own arrays go before timing: only A stays in memory.
        const auto loaded =
            longrun::cli::load_chain(o.chain, comm, longrun::io::ValidationOptions{});
        const longrun::cli::SolveLayout layout(comm, loaded.chain,
                                               longrun::cli::local_rows_of(loaded.chain),
                                               *longrun::partition::parse_layout(o.partition), "");
        partition = {{"used", longrun::partition::to_string(layout.outcome().used)},
                     {"seconds", layout.outcome().seconds}};
        for (const auto& [name, q] : {std::pair{"contiguous", layout.outcome().contiguous},
                                      std::pair{"graph", layout.outcome().graph}})
            if (q)
                partition[name] = {{"volume", q->volume},
                                   {"max_volume", q->max_volume},
                                   {"edge_cut", q->edge_cut},
                                   {"imbalance", q->imbalance}};
        a = longrun::solve::assemble_transposed(comm, layout.rows());
    }
    const std::string type = apply_requested_format(a.matrix);

    MatInfo info;
    check(MatGetInfo(a.matrix, MAT_GLOBAL_SUM, &info), "MatGetInfo");
    const auto nonzeros = static_cast<std::uint64_t>(info.nz_used);
    PetscInt local_rows = 0, ignored = 0;
    check(MatGetLocalSize(a.matrix, &local_rows, &ignored), "MatGetLocalSize");
    const auto local_nonzeros = static_cast<std::uint64_t>([&] {
        MatInfo mine;
        check(MatGetInfo(a.matrix, MAT_LOCAL, &mine), "MatGetInfo");
        return mine.nz_used;
    }());

    longrun::solve::VecHandle x, y;
    check(MatCreateVecs(a.matrix, x.out(), y.out()), "MatCreateVecs");
    check(VecSet(x, 1.0 / static_cast<double>(a.states)), "VecSet");

    // Off-diagonal block of MPIAIJ: the entries that need other ranks' x. The
    // product's parts are timed apart as well: the halo exchange alone (the ghost
    // entries of x moved between ranks, as MatMult moves them), the on-rank block
    // alone and the off-rank block alone; MatMult overlaps the exchange with the
    // on-rank block.
    nlohmann::json split = nullptr;
    PetscBool is_mpiaij = PETSC_FALSE;
    check(PetscObjectTypeCompare(reinterpret_cast<PetscObject>(a.matrix.get()), MATMPIAIJ,
                                 &is_mpiaij),
          "PetscObjectTypeCompare");
    if (is_mpiaij) {
        Mat diagonal_block = nullptr, off_block = nullptr;
        const PetscInt* ghost_map = nullptr;
        check(MatMPIAIJGetSeqAIJ(a.matrix, &diagonal_block, &off_block, &ghost_map),
              "MatMPIAIJGetSeqAIJ");
        MatInfo off;
        check(MatGetInfo(off_block, MAT_LOCAL, &off), "MatGetInfo");
        PetscInt off_rows = 0, ghosts = 0;
        check(MatGetLocalSize(off_block, &off_rows, &ghosts), "MatGetLocalSize");
        double mine[2] = {off.nz_used, static_cast<double>(ghosts)}, all[2] = {0, 0};
        MPI_Allreduce(mine, all, 2, MPI_DOUBLE, MPI_SUM, comm);
        std::uint64_t my_ghosts = static_cast<std::uint64_t>(ghosts), max_ghosts = 0;
        MPI_Allreduce(&my_ghosts, &max_ghosts, 1, MPI_UINT64_T, MPI_MAX, comm);

        longrun::solve::IsHandle wanted;
        check(ISCreateGeneral(PETSC_COMM_SELF, ghosts, ghost_map, PETSC_COPY_VALUES, wanted.out()),
              "ISCreateGeneral");
        longrun::solve::VecHandle ghost_values;
        check(VecCreateSeq(PETSC_COMM_SELF, ghosts, ghost_values.out()), "VecCreateSeq");
        longrun::solve::ScatterHandle halo;
        check(VecScatterCreate(x, wanted, ghost_values, nullptr, halo.out()), "VecScatterCreate");
        const Timing exchange = time_repeated(comm, o.repeat, [&] {
            check(VecScatterBegin(halo, x, ghost_values, INSERT_VALUES, SCATTER_FORWARD),
                  "VecScatterBegin");
            check(VecScatterEnd(halo, x, ghost_values, INSERT_VALUES, SCATTER_FORWARD),
                  "VecScatterEnd");
        });

        longrun::solve::VecHandle local_x, local_y;
        check(MatCreateVecs(diagonal_block, local_x.out(), local_y.out()), "MatCreateVecs");
        check(VecSet(local_x, 1.0 / static_cast<double>(a.states)), "VecSet");
        const Timing on_rank = time_repeated(
            comm, o.repeat, [&] { check(MatMult(diagonal_block, local_x, local_y), "MatMult"); });
        // The ghost part alone: few entries per row, x read through the ghost map.
        const Timing off_rank = time_repeated(comm, o.repeat, [&] {
            check(MatMultAdd(off_block, ghost_values, local_y, local_y), "MatMultAdd");
        });
        split = {{"off_diagonal_block_nonzeros", static_cast<std::uint64_t>(all[0])},
                 {"ghost_entries", static_cast<std::uint64_t>(all[1])},
                 {"max_ghost_entries_per_rank", max_ghosts},
                 {"halo_exchange_seconds", exchange.best},
                 {"median_halo_exchange_seconds", exchange.median},
                 {"diagonal_block_product_seconds", on_rank.best},
                 {"median_diagonal_block_product_seconds", on_rank.median},
                 {"off_diagonal_block_product_seconds", off_rank.best},
                 {"median_off_diagonal_block_product_seconds", off_rank.median}};
    }

    const double index_bytes = sizeof(PetscInt);
    const auto model_bytes = [&](double nz, double rows) {
        return nz * (8 + index_bytes) + rows * (8 + 8 + index_bytes);
    };
    const double product_bytes =
        model_bytes(static_cast<double>(nonzeros), static_cast<double>(a.states));
    const double my_product_bytes =
        model_bytes(static_cast<double>(local_nonzeros), static_cast<double>(local_rows));

    const Timing product =
        time_repeated(comm, o.repeat, [&] { check(MatMult(a.matrix, x, y), "MatMult"); });

    // The same-size arrays cover this rank's share of the product's traffic.
    const auto same_elements = static_cast<std::uint64_t>(my_product_bytes / 24.0);
    const TriadResult same = triad(comm, same_elements, o.repeat);
    const auto large_elements = static_cast<std::uint64_t>(o.triad_mib * 1024 * 1024 / 8);
    const TriadResult large = triad(comm, large_elements, o.repeat);

    const auto gbs = [](double bytes, double seconds) { return bytes / seconds / 1e9; };
    const double product_gbs = gbs(product_bytes, product.best);
    const double same_gbs = gbs(same.bytes, same.time.best);
    const double large_gbs = gbs(large.bytes, large.time.best);
    nlohmann::json j = {
        {"chain", o.chain},
        {"ranks", ranks},
        {"states", a.states},
        {"nonzeros", nonzeros},
        {"matrix_type", type},
        {"index_bytes", sizeof(PetscInt)},
        {"repeat", o.repeat},
        {"seconds_per_product", product.best},
        {"median_seconds_per_product", product.median},
        {"bytes_per_product", product_bytes},
        {"product_gbs", product_gbs},
        {"triad_gbs", large_gbs},
        {"triad_mib_per_array_per_rank", o.triad_mib},
        {"triad_same_size_gbs", same_gbs},
        {"triad_same_size_mib_per_array_per_rank",
         static_cast<double>(same.elements_per_rank) * 8 / (1024.0 * 1024.0)},
        {"product_over_triad", product_gbs / large_gbs},
        {"product_over_triad_same_size", product_gbs / same_gbs},
        {"median_seconds_triad", large.time.median},
        {"median_product_gbs", gbs(product_bytes, product.median)},
        {"median_triad_gbs", gbs(large.bytes, large.time.median)},
        {"mpiaij_split", split},
        {"partition", partition},
    };
    if (rank == 0)
        std::cout << j.dump() << std::endl;
    return 0;
}

} // namespace

int main(int argc, char** argv) {
    // Everything after a lone "--" goes to PETSc's options database.
    std::vector<std::string> ours, petsc_args;
    bool after_separator = false;
    for (int i = 0; i < argc; ++i) {
        const std::string arg = argv[i];
        if (!after_separator && arg == "--" && i > 0) {
            after_separator = true;
            continue;
        }
        (after_separator ? petsc_args : ours).push_back(arg);
    }
    int petsc_argc = 1;
    if (PetscInitialize(&petsc_argc, &argv, nullptr, nullptr) != 0) {
        std::fprintf(stderr, "longrun-bandwidth: PETSc could not start\n");
        return 4;
    }
    longrun::solve::use_exceptions_for_petsc_errors();
    MPI_Comm comm = PETSC_COMM_WORLD;
    const int rank = longrun::comm_rank(comm), ranks = longrun::comm_size(comm);

    CLI::App app{description, "longrun-bandwidth"};
    Options o;
    app.add_option("chain", o.chain, "chain file (HDF5, longrun.chain v1)")
        ->required()
        ->check(CLI::ExistingFile);
    app.add_option("--repeat", o.repeat, "timed repetitions of the product and of each triad")
        ->check(CLI::Range(1, 1000000))
        ->capture_default_str();
    app.add_option("--triad-mib", o.triad_mib, "MiB per array per rank of the large triad")
        ->check(CLI::Range(1.0, 65536.0))
        ->capture_default_str();
    app.add_option("--partition", o.partition,
                   "rows per rank as `longrun solve --partition` places them")
        ->check(CLI::IsMember({"auto", "contiguous", "graph"}))
        ->capture_default_str();
    int code = 0;
    std::vector<const char*> cargs;
    for (const auto& s : ours)
        cargs.push_back(s.c_str());
    try {
        app.parse(static_cast<int>(cargs.size()), cargs.data());
    } catch (const CLI::ParseError& e) {
        if (rank == 0)
            (void)app.exit(e);
        PetscFinalize();
        return e.get_exit_code() == 0 ? 0 : static_cast<int>(longrun::ExitCode::usage);
    }
    std::string joined;
    for (const auto& a : petsc_args)
        joined += a + " ";
    if (!joined.empty())
        PetscOptionsInsertString(nullptr, joined.c_str());

    try {
        code = run(comm, o);
    } catch (const longrun::Error& e) {
        code = static_cast<int>(e.code());
        if (!e.agreed())
            std::fprintf(stderr, "longrun-bandwidth: error (rank %d): %s\n", rank, e.what());
        else if (rank == 0)
            std::fprintf(stderr, "longrun-bandwidth: error: %s\n", e.what());
        if (ranks > 1 && !e.agreed()) // the other ranks may be waiting in a collective call
            MPI_Abort(comm, code);
    } catch (const std::exception& e) {
        std::fprintf(stderr, "longrun-bandwidth: internal error (rank %d): %s\n", rank, e.what());
        code = 70;
        if (ranks > 1)
            MPI_Abort(comm, code);
    }
    PetscFinalize();
    return code;
}

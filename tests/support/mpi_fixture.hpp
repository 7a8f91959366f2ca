// Shared pieces of the MPI tests: a scratch folder that every rank agrees on,
// writing a chain once (rank 0) for all ranks, and gathering a distribution.
#pragma once

#include "cli/solve_pipeline.hpp"
#include "io/chain_file.hpp"

#include <gtest/gtest.h>
#include <mpi.h>

#include <filesystem>
#include <random>
#include <string>
#include <vector>

namespace longrun::testing_support {

class MpiTest : public ::testing::Test {
  protected:
    void SetUp() override {
        MPI_Comm_rank(MPI_COMM_WORLD, &rank);
        MPI_Comm_size(MPI_COMM_WORLD, &size);
        std::string dir;
        if (rank == 0) {
            std::random_device rd;
            dir =
                (std::filesystem::temp_directory_path() / ("longrun-test-" + std::to_string(rd())))
                    .string();
            std::filesystem::create_directories(dir);
        }
        unsigned long n = dir.size();
        MPI_Bcast(&n, 1, MPI_UNSIGNED_LONG, 0, MPI_COMM_WORLD);
        dir.resize(n);
        MPI_Bcast(dir.data(), static_cast<int>(n), MPI_CHAR, 0, MPI_COMM_WORLD);
        folder = dir;
    }
    void TearDown() override {
        MPI_Barrier(MPI_COMM_WORLD);
        if (rank == 0)
            std::filesystem::remove_all(folder);
    }

    // Rank 0 writes; everyone gets the path after the file is complete.
    std::string write(const io::Chain& chain, const std::string& name) {
        const std::string path = folder + "/" + name;
        if (rank == 0)
            io::write_chain_file(path, chain);
        MPI_Barrier(MPI_COMM_WORLD);
        return path;
    }

    cli::SolveReport solve(const std::string& path, const std::string& method, double tol,
                           std::optional<RowRange> rows = std::nullopt) {
        cli::SolveRequest request;
        request.chain_path = path;
        request.method = method;
        request.tolerance = tol;
        request.progress = false;
        request.forced_rows = rows;
        return cli::run_solve(MPI_COMM_WORLD, request);
    }

    // The whole distribution on every rank.
    static std::vector<double> gather(const cli::SolveReport& r) {
        int size = 1;
        MPI_Comm_size(MPI_COMM_WORLD, &size);
        int mine = static_cast<int>(r.local_pi.size());
        std::vector<int> counts(size), displs(size, 0);
        MPI_Allgather(&mine, 1, MPI_INT, counts.data(), 1, MPI_INT, MPI_COMM_WORLD);
        for (int i = 1; i < size; ++i)
            displs[i] = displs[i - 1] + counts[i - 1];
        std::vector<double> all(static_cast<std::size_t>(displs.back() + counts.back()));
        MPI_Allgatherv(r.local_pi.data(), mine, MPI_DOUBLE, all.data(), counts.data(),
                       displs.data(), MPI_DOUBLE, MPI_COMM_WORLD);
        return all;
    }

    static double max_abs_difference(const std::vector<double>& a, const std::vector<double>& b) {
        double d = a.size() == b.size() ? 0.0 : INFINITY;
        for (std::size_t i = 0; i < std::min(a.size(), b.size()); ++i)
            d = std::max(d, std::abs(a[i] - b[i]));
        return d;
    }

    int rank = 0, size = 1;
    std::string folder;
};

} // namespace longrun::testing_support

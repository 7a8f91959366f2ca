// `solve` with rows moved by the graph partition: the same answer, in the chain
// file's order, as with contiguous blocks; auto's choice on both kinds of order.
#include "../support/mpi_fixture.hpp"
#include "../support/test_chains.hpp"
#include "io/error.hpp"
#include "io/iterate_file.hpp"
#include "partition/contiguous.hpp"

#include <petscsys.h>

#include <algorithm>
#include <numeric>
#include <random>

namespace longrun {
namespace {

using partition::Layout;

class PartitionedSolve : public testing_support::MpiTest {
  protected:
    cli::SolveReport run(const std::string& path, Layout layout,
                         std::optional<RowRange> rows = std::nullopt,
                         std::optional<std::string> output = std::nullopt) {
        cli::SolveRequest request;
        request.chain_path = path;
        // Sparse LU: exact up to rounding, so two layouts agree far below the
        // certificate's tolerance.
        request.method = "direct";
        request.tolerance = 1e-12;
        request.progress = false;
        request.forced_rows = rows;
        request.partition = layout;
        request.output = output;
        return cli::run_solve(MPI_COMM_WORLD, request);
    }
};

// A triangular lattice with shuffled node numbers (see test_graph_partition.cpp).
io::Chain scrambled_lattice_walk(int side, std::vector<double>& degree, double& edges_count) {
    const auto n = static_cast<std::uint64_t>(side) * side;
    std::vector<std::uint64_t> label(n);
    std::iota(label.begin(), label.end(), 0);
    std::mt19937_64 rng(11);
    std::shuffle(label.begin(), label.end(), rng);
    auto at = [&](int r, int c) { return label[static_cast<std::uint64_t>(r) * side + c]; };
    std::vector<std::pair<std::uint64_t, std::uint64_t>> edges;
    for (int r = 0; r < side; ++r)
        for (int c = 0; c < side; ++c) {
            if (c + 1 < side)
                edges.emplace_back(at(r, c), at(r, c + 1));
            if (r + 1 < side)
                edges.emplace_back(at(r, c), at(r + 1, c));
            if (r + 1 < side && c + 1 < side)
                edges.emplace_back(at(r, c), at(r + 1, c + 1));
        }
    degree.assign(n, 0);
    for (auto [a, b] : edges) {
        ++degree[a];
        ++degree[b];
    }
    edges_count = static_cast<double>(edges.size());
    return testing_support::graph_walk(n, edges);
}

TEST_F(PartitionedSolve, GraphWalkSameAnswerLessCommunication) {
    std::vector<double> degree;
    double edges = 0;
    const std::string path = write(scrambled_lattice_walk(30, degree, edges), "walk.h5");
    const auto contiguous = run(path, Layout::contiguous);
    const auto graph = run(path, Layout::graph, std::nullopt, folder + "/walk-result.h5");
    const auto chosen = run(path, Layout::automatic);
    const auto by_contiguous = gather(contiguous), by_graph = gather(graph);
    EXPECT_LT(max_abs_difference(by_graph, by_contiguous), 1e-12);
    EXPECT_LT(max_abs_difference(gather(chosen), by_contiguous), 1e-12);
    // pi_i = deg(i) / (2|E|) for the simple random walk on a connected graph
    // (Levin, Peres and Wilmer, Markov Chains and Mixing Times, Sec. 1.5).
    std::vector<double> closed_form(degree.size());
    for (std::size_t i = 0; i < degree.size(); ++i)
        closed_form[i] = degree[i] / (2 * edges);
    EXPECT_LT(max_abs_difference(by_graph, closed_form), 1e-12);
    // The result file is in the chain file's order too.
    const auto stored = io::read_distribution_slice(folder + "/walk-result.h5", MPI_COMM_WORLD,
                                                    {0, degree.size()}, degree.size());
    EXPECT_LT(max_abs_difference(stored, closed_form), 1e-12);

    if (size == 1) {
        EXPECT_EQ(graph.partition.used, Layout::contiguous);
        EXPECT_FALSE(graph.partition.graph.has_value());
        return;
    }
    EXPECT_EQ(contiguous.partition.used, Layout::contiguous);
    // Contiguous blocks of scrambled numbers: the report points at auto.
    EXPECT_NE(contiguous.partition.reason.find("--partition auto may cut"), std::string::npos)
        << contiguous.partition.reason;
    EXPECT_EQ(graph.partition.used, Layout::graph);
    EXPECT_EQ(chosen.partition.used, Layout::graph);
    ASSERT_TRUE(graph.partition.graph && graph.partition.contiguous);
    EXPECT_LT(graph.partition.graph->volume * 2, graph.partition.contiguous->volume);
}

TEST_F(PartitionedSolve, LexicographicTandemKeepsContiguous) {
    const std::string path = write(testing_support::tandem(40, 25, 1.0, 1.2, 1.5), "tandem.h5");
    const auto chosen = run(path, Layout::automatic);
    EXPECT_EQ(chosen.partition.used, Layout::contiguous);
    // Either the partitioner was skipped (little communication) or it did not
    // halve the volume.
    if (chosen.partition.graph) {
        EXPECT_GT(chosen.partition.graph->volume * 2, chosen.partition.contiguous->volume);
    }
    const auto forced = run(path, Layout::graph);
    EXPECT_LT(max_abs_difference(gather(forced), gather(chosen)), 1e-12);
}

TEST_F(PartitionedSolve, RankWithoutRows) {
    // Rank 0 reads no rows; the graph partition then hands it some (or, with
    // three ranks and few states, maybe none) and the answer is unchanged.
    std::vector<double> degree;
    double edges = 0;
    const std::string path = write(scrambled_lattice_walk(6, degree, edges), "small.h5");
    const std::uint64_t n = degree.size();
    const RowRange rows = rank == 0 || size == 1 ? RowRange{0, size == 1 ? n : 0}
                                                 : partition::even_rows(n, size - 1, rank - 1);
    const auto contiguous = run(path, Layout::contiguous, rows);
    const auto graph = run(path, Layout::graph, rows);
    EXPECT_LT(max_abs_difference(gather(graph), gather(contiguous)), 1e-12);
    if (size > 1) {
        EXPECT_EQ(graph.partition.used, Layout::graph);
    }

    // Fewer states than ranks: the partitioner declines and the rows stay put.
    const std::string two =
        write(testing_support::dense_dtmc({{0.5, 0.5}, {0.25, 0.75}}), "two.h5");
    const auto tiny = run(two, Layout::graph);
    if (size > 2) {
        EXPECT_EQ(tiny.partition.used, Layout::contiguous);
    }
    const auto pair = gather(tiny);
    // pi = (1/3, 2/3) solves pi P = pi for this P (checked by hand: 1/6 + 1/6 = 1/3).
    EXPECT_NEAR(pair[0], 1.0 / 3.0, 1e-14);
    EXPECT_NEAR(pair[1], 2.0 / 3.0, 1e-14);
}

// Ranks without rows whose empty ranges start anywhere (rows forced per rank,
// as the reversibility tests do): every layout reaches the answer of contiguous
// blocks, and the closed form, on every rank count. This hung on 3 ranks when
// one rank threw before the adjacency exchange and the others waited in it.
TEST_F(PartitionedSolve, EmptyRanksAnywhereEveryLayout) {
    std::vector<double> degree;
    double edges = 0;
    const std::string path = write(scrambled_lattice_walk(7, degree, edges), "empty.h5");
    const std::uint64_t n = degree.size();
    // pi_i = deg(i) / (2|E|) (Levin, Peres and Wilmer, Markov Chains and Mixing
    // Times, Sec. 1.5).
    std::vector<double> closed_form(n);
    for (std::uint64_t i = 0; i < n; ++i)
        closed_form[i] = degree[i] / (2 * edges);
    const RowRange all_on_last = rank == size - 1 ? RowRange{0, n} : RowRange{n, n};
    // With 3 ranks the middle one is empty, its begin inside the others' rows.
    RowRange middle_empty{0, n};
    if (size == 2)
        middle_empty = rank == 0 ? RowRange{0, n / 2} : RowRange{n / 2, n};
    if (size == 3)
        middle_empty = rank == 0   ? RowRange{0, n / 2}
                       : rank == 1 ? RowRange{n / 3, n / 3}
                                   : RowRange{n / 2, n};
    for (const RowRange rows : {all_on_last, middle_empty}) {
        const auto contiguous = run(path, Layout::contiguous, rows);
        const auto by_contiguous = gather(contiguous);
        EXPECT_LT(max_abs_difference(by_contiguous, closed_form), 1e-12);
        for (const Layout layout : {Layout::automatic, Layout::graph}) {
            const auto other = run(path, layout, rows);
            EXPECT_LT(max_abs_difference(gather(other), by_contiguous), 1e-12)
                << partition::to_string(layout) << ": " << other.partition.reason;
            EXPECT_EQ(other.rows, contiguous.rows); // results come back on the rows as read
        }
        if (size > 1) {
            ASSERT_TRUE(contiguous.partition.contiguous.has_value());
            EXPECT_EQ(contiguous.partition.reason.rfind("requested", 0), 0u)
                << contiguous.partition.reason;
        }
    }
}

// Checkpoints are stored in the chain file's order whatever the layout. Power
// steps commute with renumbering the states, so three of them from the uniform
// vector leave the same checkpoint with rows moved as with contiguous blocks;
// and a resume on moved rows reaches the closed form.
TEST_F(PartitionedSolve, CheckpointsInFileOrderUnderAGraphLayout) {
    std::vector<double> degree;
    double edges = 0;
    const std::string path = write(scrambled_lattice_walk(30, degree, edges), "ck-walk.h5");
    const std::uint64_t n = degree.size();
    auto stopped_after_three_steps = [&](Layout layout, const std::string& checkpoint) {
        cli::SolveRequest r;
        r.chain_path = path;
        r.method = "power";
        r.tolerance = 1e-12;
        r.progress = false;
        r.partition = layout;
        r.checkpoint = checkpoint;
        r.checkpoint_every = 0;
        PetscOptionsSetValue(nullptr, "-power_max_it", "3");
        int code = 0;
        try {
            (void)cli::run_solve(MPI_COMM_WORLD, r);
        } catch (const Error& e) {
            code = static_cast<int>(e.code());
        }
        PetscOptionsClearValue(nullptr, "-power_max_it");
        MPI_Allreduce(MPI_IN_PLACE, &code, 1, MPI_INT, MPI_MAX, MPI_COMM_WORLD);
        return code;
    };
    const std::string in_blocks = folder + "/ck-contiguous.h5", moved = folder + "/ck-graph.h5";
    EXPECT_EQ(stopped_after_three_steps(Layout::contiguous, in_blocks),
              static_cast<int>(ExitCode::numerical));
    EXPECT_EQ(stopped_after_three_steps(Layout::graph, moved),
              static_cast<int>(ExitCode::numerical));
    const auto from_blocks = io::read_distribution_slice(in_blocks, MPI_COMM_WORLD, {0, n}, n);
    const auto from_moved = io::read_distribution_slice(moved, MPI_COMM_WORLD, {0, n}, n);
    EXPECT_LT(max_abs_difference(from_moved, from_blocks), 1e-15);
    // The steps left the uniform vector far enough that a permuted one would show.
    EXPECT_GT(max_abs_difference(from_blocks, std::vector<double>(n, 1.0 / double(n))), 1e-5);

    cli::SolveRequest resume;
    resume.chain_path = path;
    resume.method = "linear";
    resume.tolerance = 1e-12;
    resume.progress = false;
    resume.partition = Layout::graph;
    resume.resume = moved;
    const auto resumed = cli::run_solve(MPI_COMM_WORLD, resume);
    EXPECT_NE(resumed.start_from.find("resumed from"), std::string::npos) << resumed.start_from;
    if (size > 1) {
        EXPECT_EQ(resumed.partition.used, Layout::graph) << resumed.partition.reason;
    }
    // pi_i = deg(i) / (2|E|) (Levin, Peres and Wilmer, Markov Chains and Mixing
    // Times, Sec. 1.5).
    std::vector<double> closed_form(n);
    for (std::uint64_t i = 0; i < n; ++i)
        closed_form[i] = degree[i] / (2 * edges);
    EXPECT_LT(max_abs_difference(gather(resumed), closed_form), 1e-11);
}

} // namespace
} // namespace longrun

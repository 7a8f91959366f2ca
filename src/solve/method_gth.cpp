// `gth`: exact GTH elimination (gth.hpp) on rank 0. The distributed matrix
// A = Q^T (or P^T) is gathered there, turned back into the chain's own rows
// (GTH eliminates rows of Q or P, not of its transpose), eliminated, and the
// result scattered back. Dense: n^2 doubles on rank 0 and O(n^3) time, so it
// declines, on every rank alike, above -gth_max_states (default 20,000) or when
// the dense matrix would not fit settings.memory_limit_bytes.
#include "method.hpp"

#include "gth.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cstdint>
#include <limits>
#include <vector>

namespace longrun::solve {

namespace {

// This rank's rows of A in CSR with global column indices.
struct CsrSlice {
    std::vector<int> lengths;
    std::vector<PetscInt> columns;
    std::vector<double> values;
};

CsrSlice local_rows_of(Mat m) {
    PetscInt lo = 0, hi = 0;
    check(MatGetOwnershipRange(m, &lo, &hi), "MatGetOwnershipRange");
    CsrSlice out;
    for (PetscInt row = lo; row < hi; ++row) {
        PetscInt n = 0;
        const PetscInt* cols = nullptr;
        const PetscScalar* vals = nullptr;
        check(MatGetRow(m, row, &n, &cols, &vals), "MatGetRow");
        out.lengths.push_back(static_cast<int>(n));
        out.columns.insert(out.columns.end(), cols, cols + n);
        out.values.insert(out.values.end(), vals, vals + n);
        check(MatRestoreRow(m, row, &n, &cols, &vals), "MatRestoreRow");
    }
    return out;
}

// Gathers every rank's `mine` on rank 0 (empty elsewhere). Collective.
template <class T>
std::vector<T> gather_on_root(MPI_Comm comm, const std::vector<T>& mine, MPI_Datatype type) {
    int rank = 0, size = 1;
    MPI_Comm_rank(comm, &rank);
    MPI_Comm_size(comm, &size);
    int count = static_cast<int>(mine.size());
    std::vector<int> counts(size, 0), displs(size, 0);
    MPI_Gather(&count, 1, MPI_INT, counts.data(), 1, MPI_INT, 0, comm);
    std::vector<T> all;
    if (rank == 0) {
        for (int r = 1; r < size; ++r)
            displs[r] = displs[r - 1] + counts[r - 1];
        all.resize(static_cast<std::size_t>(displs.back() + counts.back()));
    }
    MPI_Gatherv(mine.data(), count, type, all.data(), counts.data(), displs.data(), type, 0, comm);
    return all;
}

// Rows of A are destination states; GTH wants source rows: a counting sort by
// column turns A's CSR into the CSR of its transpose. Targets come out
// increasing because A's rows are visited in order.
struct SourceRows {
    std::vector<std::uint64_t> offsets, targets;
    std::vector<double> weights;
};

SourceRows transpose_back(std::uint64_t n, const std::vector<int>& lengths,
                          const std::vector<PetscInt>& columns, const std::vector<double>& values) {
    SourceRows out;
    out.offsets.assign(n + 1, 0);
    for (auto c : columns)
        ++out.offsets[static_cast<std::uint64_t>(c) + 1];
    for (std::uint64_t i = 0; i < n; ++i)
        out.offsets[i + 1] += out.offsets[i];
    out.targets.resize(columns.size());
    out.weights.resize(columns.size());
    std::vector<std::uint64_t> next(out.offsets.begin(), out.offsets.end() - 1);
    std::size_t k = 0;
    for (std::uint64_t destination = 0; destination < n; ++destination)
        for (int e = 0; e < lengths[destination]; ++e, ++k) {
            const auto source = static_cast<std::uint64_t>(columns[k]);
            out.targets[next[source]] = destination;
            out.weights[next[source]++] = values[k];
        }
    return out;
}

} // namespace

Attempt run_gth(const TransposedChain& a, Vec, const MethodSettings& s) {
    MPI_Comm comm = PetscObjectComm((PetscObject)a.matrix.get());
    int rank = 0, size = 1;
    MPI_Comm_rank(comm, &rank);
    MPI_Comm_size(comm, &size);
    Attempt attempt;
    attempt.method = "gth";

    // Every rank knows the size and reads the same options: the verdict is agreed.
    PetscInt max_states = 20000;
    check(PetscOptionsGetInt(nullptr, "gth_", "-max_states", &max_states, nullptr),
          "PetscOptionsGetInt");
    if (a.states > max_states)
        throw MethodDeclined(fmt::format("{} states exceed the limit of {} for dense "
                                         "elimination (raise it with -gth_max_states)",
                                         a.states, max_states));
    const double dense_bytes = 8.0 * double(a.states) * double(a.states);
    if (s.memory_limit_bytes > 0 && dense_bytes > double(s.memory_limit_bytes))
        throw MethodDeclined(fmt::format("the dense {} x {} matrix needs {:.3g} MB on rank 0, "
                                         "over the limit of {:.3g} MB",
                                         a.states, a.states, dense_bytes / 1048576.0,
                                         s.memory_limit_bytes / 1048576.0));
    if (s.progress) {
        s.progress->begin("gth", s.tolerance);
        s.progress->note(fmt::format("gth: dense elimination of {} states on rank 0", a.states));
    }

    const CsrSlice slice = local_rows_of(a.matrix);
    const auto lengths = gather_on_root(comm, slice.lengths, MPI_INT);
    const auto columns = gather_on_root(comm, slice.columns, MPIU_INT);
    const auto values = gather_on_root(comm, slice.values, MPI_DOUBLE);

    const auto n = static_cast<std::uint64_t>(a.states);
    std::vector<double> pi;
    std::string failure;
    if (rank == 0) {
        const SourceRows rows = transpose_back(n, lengths, columns, values);
        const LocalRows chain{a.time, n, RowRange{0, n}, rows.offsets, rows.targets, rows.weights};
        try {
            pi = gth_stationary(chain);
        } catch (const Error& e) {
            failure = e.what(); // told to every rank below, so that all return alike
        }
    }
    int failed = failure.empty() ? 0 : 1;
    MPI_Bcast(&failed, 1, MPI_INT, 0, comm);
    if (failed) {
        unsigned long length = failure.size();
        MPI_Bcast(&length, 1, MPI_UNSIGNED_LONG, 0, comm);
        failure.resize(length);
        MPI_Bcast(failure.data(), static_cast<int>(length), MPI_CHAR, 0, comm);
        attempt.certificate.problem = failure;
        attempt.certificate.residual = INFINITY;
        attempt.notes.push_back(failure);
        return attempt;
    }

    VecHandle x = create_state_vector(a);
    const PetscInt* ranges = nullptr;
    check(VecGetOwnershipRanges(x, &ranges), "VecGetOwnershipRanges");
    std::vector<int> counts(size), displs(size);
    for (int r = 0; r < size; ++r) {
        displs[r] = static_cast<int>(ranges[r]);
        counts[r] = static_cast<int>(ranges[r + 1] - ranges[r]);
    }
    PetscScalar* local = nullptr;
    check(VecGetArray(x, &local), "VecGetArray");
    MPI_Scatterv(pi.data(), counts.data(), displs.data(), MPI_DOUBLE, local, counts[rank],
                 MPI_DOUBLE, 0, comm);
    check(VecRestoreArray(x, &local), "VecRestoreArray");

    Certificate c = certify(a, x);
    if (c.valid) {
        // GTH subtracts nothing, so each entry comes out with a relative error
        // of a modest multiple of the unit roundoff that grows with the number
        // of states (O'Cinneide's entrywise analysis of GTH, Numer. Math. 1993;
        // the factor n here is a working assumption, not the paper's bound).
        // A residual larger than that means something else went wrong, and
        // then the residual is the better (still optimistic) figure.
        const double unit_roundoff = std::numeric_limits<double>::epsilon() / 2;
        c.error_estimate = std::max(double(a.states) * unit_roundoff, c.residual);
        c.error_estimate_method = "gth: number of states x unit roundoff (entrywise accuracy "
                                  "of subtraction-free elimination)";
    }
    record_iteration(attempt, 0, c.valid ? c.residual : INFINITY, s);
    keep_if_better(attempt, a, x, c);
    attempt.notes.push_back(fmt::format("dense elimination of {} states on rank 0 in {:.3g} s; "
                                        "certified residual {:.3e}",
                                        a.states, attempt.seconds.back(), c.residual));
    return attempt;
}

} // namespace longrun::solve

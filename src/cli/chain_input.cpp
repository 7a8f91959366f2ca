#include "chain_input.hpp"

#include "matrix_market_kind.hpp"
#include "paths.hpp"

#include "io/matrix_market.hpp"
#include "io/mpi_agree.hpp"
#include "partition/contiguous.hpp"

#include <fmt/format.h>

#include <fstream>

namespace longrun::cli {

namespace {

io::Chain rows_of(const io::Chain& whole, RowRange rows) {
    io::Chain slice;
    slice.kind = whole.kind;
    slice.states = whole.states;
    slice.transitions = whole.transitions;
    slice.rows = rows;
    const auto first = whole.offsets[rows.begin], last = whole.offsets[rows.end];
    slice.offsets.clear();
    for (auto r = rows.begin; r <= rows.end; ++r)
        slice.offsets.push_back(whole.offsets[r] - first);
    slice.targets.assign(whole.targets.begin() + static_cast<std::ptrdiff_t>(first),
                         whole.targets.begin() + static_cast<std::ptrdiff_t>(last));
    slice.weights.assign(whole.weights.begin() + static_cast<std::ptrdiff_t>(first),
                         whole.weights.begin() + static_cast<std::ptrdiff_t>(last));
    return slice;
}

LoadedChain load_matrix_market(const std::string& path, MPI_Comm comm,
                               std::optional<io::ChainKind> kind,
                               const io::ValidationOptions& options, bool transposed) {
    LoadedChain out;
    io::Chain whole;
    agree_on_local_work(comm, [&] {
        whole = io::read_matrix_market(
            path, kind ? *kind : matrix_market_kind(path, transposed),
            {.transposed = transposed, .row_sum_tolerance = options.row_sum_tolerance});
        if (auto fault = io::validate_slice(whole, path, options, out.validation))
            throw in_matrix_market_terms(*fault, path, transposed);
    });
    whole.transitions = whole.targets.size();
    out.header.path = path;
    out.header.kind = whole.kind;
    out.header.states = whole.states;
    out.header.transitions = whole.transitions;
    const RowRange even = partition::even_rows(whole.states, comm_size(comm), comm_rank(comm));
    const std::vector<std::uint64_t> offsets(
        whole.offsets.begin() + static_cast<std::ptrdiff_t>(even.begin),
        whole.offsets.begin() + static_cast<std::ptrdiff_t>(even.end) + 1);
    const RowRange mine =
        partition::balance_by_nonzeros(comm, even, offsets, whole.states, whole.transitions);
    out.chain = rows_of(whole, mine);
    return out;
}

} // namespace

// The validator speaks of chain-file datasets and 0-based rows; someone holding
// a Matrix Market file has neither, and counts its lines from 1: say "row 134"
// for the file's row 134 (its column, when the file is read transposed), not
// "/chain/weights: row 133".
Error in_matrix_market_terms(const LocalFault& fault, const std::string& file, bool transposed) {
    const std::string chain_terms = ": row " + std::to_string(fault.row) + ": ";
    std::string detail = fault.message;
    if (const auto at = detail.find(chain_terms); at != std::string::npos)
        detail.erase(0, at + chain_terms.size());
    return Error(fault.code,
                 fmt::format("{}: {} {} (state {} counting from 0): {}", file,
                             transposed ? "column" : "row", fault.row + 1, fault.row, detail));
}

bool is_matrix_market(const std::string& path) {
    std::ifstream in(path, std::ios::binary);
    char head[14] = {};
    in.read(head, sizeof head);
    return std::string(head, static_cast<std::size_t>(in.gcount())) == "%%MatrixMarket" ||
           has_extension(path, ".mtx");
}

LoadedChain load_any_chain(const std::string& path, MPI_Comm comm,
                           std::optional<io::ChainKind> kind, const io::ValidationOptions& options,
                           bool transposed) {
    if (is_matrix_market(path))
        return load_matrix_market(path, comm, kind, options, transposed);
    return load_chain(path, comm, options);
}

} // namespace longrun::cli

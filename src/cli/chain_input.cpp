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

// The validator speaks of chain-file datasets and 0-based rows; a Matrix Market
// file has neither and counts rows from 1.
Error in_matrix_market_terms(const LocalFault& fault, const std::string& file) {
    const std::string chain_terms = ": row " + std::to_string(fault.row) + ": ";
    std::string detail = fault.message;
    if (const auto at = detail.find(chain_terms); at != std::string::npos)
        detail.erase(0, at + chain_terms.size());
    return Error(fault.code, fmt::format("{}: row {} (state {} counting from 0): {}", file,
                                         fault.row + 1, fault.row, detail));
}

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
                               const io::ValidationOptions& options) {
    LoadedChain out;
    io::Chain whole;
    agree_on_local_work(comm, [&] {
        whole = io::read_matrix_market(path, kind ? *kind : matrix_market_kind(path));
        if (auto fault = io::validate_slice(whole, path, options, out.validation))
            throw in_matrix_market_terms(*fault, path);
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

bool is_matrix_market(const std::string& path) {
    std::ifstream in(path, std::ios::binary);
    char head[14] = {};
    in.read(head, sizeof head);
    return std::string(head, static_cast<std::size_t>(in.gcount())) == "%%MatrixMarket" ||
           has_extension(path, ".mtx");
}

LoadedChain load_any_chain(const std::string& path, MPI_Comm comm,
                           std::optional<io::ChainKind> kind,
                           const io::ValidationOptions& options) {
    if (is_matrix_market(path))
        return load_matrix_market(path, comm, kind, options);
    return load_chain(path, comm, options);
}

} // namespace longrun::cli

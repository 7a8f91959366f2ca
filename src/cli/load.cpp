#include "load.hpp"

#include "partition/contiguous.hpp"

namespace longrun::cli {

LoadedChain load_chain(const std::string& path, MPI_Comm comm, const io::ValidationOptions& options,
                       std::optional<RowRange> rows) {
    LoadedChain out;
    out.header = io::read_chain_header(path, comm);
    const auto& h = out.header;
    if (!rows) {
        const RowRange even = partition::even_rows(h.states, comm_size(comm), comm_rank(comm));
        const auto offsets = io::read_offsets(h, even, comm);
        rows = partition::balance_by_nonzeros(comm, even, offsets, h.states, h.transitions);
    }
    out.chain = io::read_chain_slice(h, *rows, comm, options, &out.validation);
    return out;
}

} // namespace longrun::cli

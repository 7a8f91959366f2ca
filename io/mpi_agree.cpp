#include "mpi_agree.hpp"

#include <limits>
#include <vector>

namespace longrun {

int comm_rank(MPI_Comm comm) {
    int r = 0;
    MPI_Comm_rank(comm, &r);
    return r;
}

int comm_size(MPI_Comm comm) {
    int s = 1;
    MPI_Comm_size(comm, &s);
    return s;
}

void agree_or_throw(MPI_Comm comm, const std::optional<LocalFault>& fault) {
    constexpr auto none = std::numeric_limits<std::uint64_t>::max();
    struct {
        double row; // MPI_DOUBLE_INT pairs for MINLOC; rows up to 2^53 are exact
        int rank;
    } mine{fault ? static_cast<double>(fault->row) : static_cast<double>(none), comm_rank(comm)},
        first{};
    MPI_Allreduce(&mine, &first, 1, MPI_DOUBLE_INT, MPI_MINLOC, comm);
    if (first.row == static_cast<double>(none))
        return;
    int code = fault ? static_cast<int>(fault->code) : 0;
    MPI_Bcast(&code, 1, MPI_INT, first.rank, comm);
    std::string message = fault ? fault->message : std::string();
    unsigned long length = message.size();
    MPI_Bcast(&length, 1, MPI_UNSIGNED_LONG, first.rank, comm);
    message.resize(length);
    MPI_Bcast(message.data(), static_cast<int>(length), MPI_CHAR, first.rank, comm);
    Error agreed(static_cast<ExitCode>(code), message);
    agreed.mark_agreed();
    throw agreed;
}

} // namespace longrun

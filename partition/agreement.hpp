// A failure found on some ranks becomes an exception on every rank. A rank that
// threw alone would leave the others waiting in the next collective call forever,
// so local checks are reduced first and only then thrown.
#pragma once

#include <mpi.h>

#include <stdexcept>
#include <string>

namespace longrun::partition {

// Collective. Throws std::runtime_error(`what`) on every rank when `locally_ok`
// is false on any rank.
inline void agree_or_throw(MPI_Comm comm, bool locally_ok, const std::string& what) {
    int failed = locally_ok ? 0 : 1;
    MPI_Allreduce(MPI_IN_PLACE, &failed, 1, MPI_INT, MPI_LOR, comm);
    if (failed)
        throw std::runtime_error(what);
}

} // namespace longrun::partition

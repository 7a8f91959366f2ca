// Collective agreement on errors. A rank that finds bad input must not leave a
// collective call alone (the others would wait for ever): every rank reports its
// local verdict, and all of them throw the same error, the one at the lowest row.
#pragma once

#include "error.hpp"

#include <mpi.h>

#include <cstdint>
#include <optional>
#include <string>

namespace longrun {

struct LocalFault {
    std::uint64_t row = 0; // orders the faults: the first row in the file wins
    ExitCode code = ExitCode::bad_input;
    std::string message;
};

// Collective. Throws Error (with the lowest-row fault's code and message) on every
// rank when any rank passed a fault; returns normally on every rank otherwise.
void agree_or_throw(MPI_Comm comm, const std::optional<LocalFault>& fault);

// Collective. Runs `body` and turns an Error thrown on some ranks into the same
// Error on all ranks. Only for bodies that make no collective calls themselves.
template <class Body>
void agree_on_local_work(MPI_Comm comm, Body&& body) {
    std::optional<LocalFault> fault;
    try {
        body();
    } catch (const Error& e) {
        fault = LocalFault{0, e.code(), e.what()};
    }
    agree_or_throw(comm, fault);
}

int comm_rank(MPI_Comm comm);
int comm_size(MPI_Comm comm);

} // namespace longrun

// SIGTERM and SIGINT during `solve`: batch schedulers send SIGTERM some time
// before the hard kill at the wall-time limit. The handler only records the
// signal; the solve acts on it at its next agreed point (a checkpoint check in
// a method's iteration, or between the stages of the job), so that all ranks
// stop together and no file is left half-written.
#pragma once

#include "io/error.hpp"

#include <mpi.h>

#include <string>

namespace longrun::cli {

// Installs the recording handler for SIGTERM and SIGINT. A second SIGINT (a user
// pressing Ctrl-C twice) ends the process at once, as without the handler.
void install_stop_handlers();

// The signal this rank has received (0: none). Local, async-signal-safe to read.
int stop_signal_received() noexcept;

// Collective: the signal any rank has received (0: none), the same on every rank.
int agreed_stop_signal(MPI_Comm comm);

// "SIGTERM", "SIGINT" or "signal N".
std::string signal_name(int signal);

// The job was told to stop. Thrown on every rank alike (after agreeing), so the
// front end prints it once and exits with ExitCode::interrupted.
Error stopped(const std::string& message);

// Collective: throws `stopped` on every rank when any rank got a stop signal;
// `doing` says what the job was doing ("reading the chain").
void stop_if_signalled(MPI_Comm comm, const std::string& doing);

} // namespace longrun::cli

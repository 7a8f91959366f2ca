#include "stop_signal.hpp"

#include <fmt/format.h>

#include <csignal>

namespace longrun::cli {

namespace {

volatile std::sig_atomic_t received = 0;

extern "C" void record_stop_signal(int signal) {
    received = signal;
}

void install(int signal, int flags) {
    struct sigaction action {};
    action.sa_handler = record_stop_signal;
    sigemptyset(&action.sa_mask);
    // Restarted system calls: a signal in the middle of a write must not turn
    // into a spurious I/O error.
    action.sa_flags = SA_RESTART | flags;
    sigaction(signal, &action, nullptr);
}

} // namespace

void install_stop_handlers() {
    install(SIGTERM, 0);
    install(SIGINT, SA_RESETHAND);
}

int stop_signal_received() noexcept {
    return received;
}

int agreed_stop_signal(MPI_Comm comm) {
    int mine = received, any = 0;
    MPI_Allreduce(&mine, &any, 1, MPI_INT, MPI_MAX, comm);
    return any;
}

std::string signal_name(int signal) {
    switch (signal) {
    case SIGTERM:
        return "SIGTERM";
    case SIGINT:
        return "SIGINT";
    default:
        return fmt::format("signal {}", signal);
    }
}

Error stopped(const std::string& message) {
    Error e(ExitCode::interrupted, message);
    e.mark_agreed();
    return e;
}

void stop_if_signalled(MPI_Comm comm, const std::string& doing) {
    if (const int signal = agreed_stop_signal(comm))
        throw stopped(
            fmt::format("stopped by {} while {}; nothing written", signal_name(signal), doing));
}

} // namespace longrun::cli

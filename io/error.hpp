// Typed errors shared by every layer. The command-line front end turns each into
// one line on stderr and the exit code that batch scripts test for.
#pragma once

#include <stdexcept>
#include <string>

namespace longrun {

enum class ExitCode : int {
    ok = 0,
    usage = 1,         // the command line itself is wrong
    bad_input = 2,     // an input file is unreadable, malformed or inconsistent
    no_unique = 3,     // the chain has no unique stationary distribution
    numerical = 4,     // no method reached the certificate within tolerance
    disagreement = 5,  // simulation disagrees with a solved result
    output_failed = 6, // the result could not be written (disk full, permissions)
    interrupted = 7,   // stopped by SIGTERM/SIGINT after writing a checkpoint: resume it
};

class Error : public std::runtime_error {
  public:
    Error(ExitCode code, const std::string& message) : std::runtime_error(message), code_(code) {}
    ExitCode code() const noexcept { return code_; }
    // True when every rank is known to throw this same error (see mpi_agree.hpp);
    // otherwise the front end must abort the whole job rather than leave ranks waiting.
    bool agreed() const noexcept { return agreed_; }
    Error& mark_agreed() noexcept {
        agreed_ = true;
        return *this;
    }

  private:
    ExitCode code_;
    bool agreed_ = false;
};

struct UsageError : Error {
    explicit UsageError(const std::string& m) : Error(ExitCode::usage, m) {}
};
struct InputError : Error {
    explicit InputError(const std::string& m) : Error(ExitCode::bad_input, m) {}
};
struct StructureError : Error {
    explicit StructureError(const std::string& m) : Error(ExitCode::no_unique, m) {}
};
struct NumericalError : Error {
    explicit NumericalError(const std::string& m) : Error(ExitCode::numerical, m) {}
};
struct OutputError : Error {
    explicit OutputError(const std::string& m) : Error(ExitCode::output_failed, m) {}
};

} // namespace longrun

// Nothing half-written under the final name: output goes to a temporary file in
// the same folder (so that rename is atomic on POSIX file systems) and is renamed
// only by commit(). If commit() is never reached the temporary file is removed.
// Nothing but a regular file is ever replaced: a device, fifo, socket or folder
// under the final name is refused (exit 6), and a symbolic link to a regular file
// is written through (its target is replaced, the link stays).
#pragma once

#include <mpi.h>

#include <optional>
#include <string>

namespace longrun::io {

// What exists at `path` that an output must not replace, in words ("a folder", "a
// device", "a named pipe (fifo)", "a socket", "a symbolic link to nothing"); empty
// when nothing is there or a regular file (or a link to one) is.
std::string unreplaceable(const std::string& path);

class AtomicOutput {
  public:
    // Serial use.
    explicit AtomicOutput(std::string final_path);
    // Collective use: every rank of comm gets the same temporary name; rank 0
    // renames or removes.
    AtomicOutput(std::string final_path, MPI_Comm comm);
    AtomicOutput(const AtomicOutput&) = delete;
    AtomicOutput& operator=(const AtomicOutput&) = delete;
    ~AtomicOutput();

    const std::string& temporary() const noexcept { return temporary_; }
    const std::string& final_path() const noexcept { return final_; }
    // Collective when constructed with a communicator. Throws OutputError.
    void commit();

  private:
    std::string final_;
    std::string temporary_;
    std::optional<MPI_Comm> comm_;
    bool committed_ = false;
};

} // namespace longrun::io

// Nothing half-written under the final name: output goes to a temporary file in
// the same folder (so that rename is atomic on POSIX file systems) and is renamed
// only by commit(). If commit() is never reached the temporary file is removed.
#pragma once

#include <mpi.h>

#include <optional>
#include <string>

namespace longrun::io {

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

#pragma once

#include "io/atomic_output.hpp"
#include "io/error.hpp"

#include <mpi.h>

#include <filesystem>
#include <functional>
#include <string>
#include <vector>

namespace longrun::cli {

// Inputs are never modified: an output path that names an input is refused.
inline void require_distinct(const std::string& input, const std::string& output) {
    std::error_code ec;
    if (std::filesystem::exists(output, ec) && std::filesystem::equivalent(input, output, ec))
        throw UsageError("the output '" + output +
                         "' is the input file; longrun never "
                         "writes into its input");
}

inline void require_writable_folder(const std::string& output) {
    auto folder = std::filesystem::path(output).parent_path();
    if (folder.empty())
        folder = ".";
    if (!std::filesystem::is_directory(folder))
        throw UsageError("the folder of the output '" + output + "' does not exist");
}

// An output file: its folder exists, and nothing is under its name but possibly a
// regular file, which it then replaces. Refused before any work, so that
// `-o /dev/null` or `-o .` never costs a solve (nor, as root, a device node).
inline void require_output_file(const std::string& output) {
    if (const std::string there = io::unreplaceable(output); !there.empty())
        throw UsageError("the output '" + output + "' exists and is " + there +
                         "; longrun replaces only regular files: name a new file");
    require_writable_folder(output);
}

inline bool has_extension(const std::string& path, const char* ext) {
    return std::filesystem::path(path).extension() == ext;
}

// Who writes the outputs: rank 0 alone (tables, plots, serial HDF5) or every rank
// (a result or checkpoint written through MPI-IO).
enum class Writers { rank0, every_rank };

// Collective; call before any other collective work. Runs `checks` (the usage
// checks of the output paths) on every rank, then creates and removes a file
// beside each of `probes` on rank 0, or on one rank per node when every rank
// writes. Ranks need not see the same file system (node-local scratch, a relative
// path on ranks started in different folders): a failure on any rank becomes the
// same error on all of them, so none is left waiting in a collective call.
void agree_on_outputs(MPI_Comm comm, const std::function<void()>& checks,
                      const std::vector<std::string>& probes, Writers writers = Writers::rank0);

} // namespace longrun::cli

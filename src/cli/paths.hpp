#pragma once

#include "io/error.hpp"

#include <filesystem>
#include <string>

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

inline bool has_extension(const std::string& path, const char* ext) {
    return std::filesystem::path(path).extension() == ext;
}

} // namespace longrun::cli

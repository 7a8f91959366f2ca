// Small text outputs (reports, tables) written whole: under a temporary name in
// the same folder, renamed when complete.
#pragma once

#include <string>

namespace longrun::cli {

// Serial. Throws OutputError.
void write_text_file(const std::string& path, const std::string& text);

// Serial. Creates and removes a file beside `path`, so that a long job finds out
// at its start, not its end, that it cannot write there. Throws OutputError.
void probe_writable(const std::string& path);

} // namespace longrun::cli

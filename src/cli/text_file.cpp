#include "text_file.hpp"

#include "io/atomic_output.hpp"
#include "io/error.hpp"

#include <unistd.h>

#include <cerrno>
#include <cstdio>
#include <cstring>

namespace longrun::cli {

namespace {

[[noreturn]] void fail(const std::string& path, const char* what) {
    throw OutputError(path + ": " + what + ": " + std::strerror(errno));
}

} // namespace

void write_text_file(const std::string& path, const std::string& text) {
    io::AtomicOutput out(path);
    std::FILE* f = std::fopen(out.temporary().c_str(), "wb");
    if (!f)
        fail(path, "cannot create");
    // Durable before the rename: a crash must not leave an empty file in place.
    const bool written = std::fwrite(text.data(), 1, text.size(), f) == text.size() &&
                         std::fflush(f) == 0 && (::fsync(::fileno(f)) == 0 || errno == EINVAL);
    const int write_error = errno;
    const bool closed = std::fclose(f) == 0;
    if (!written)
        errno = write_error;
    if (!written || !closed)
        fail(path, "cannot write");
    out.commit();
}

void probe_writable(const std::string& path) {
    io::AtomicOutput probe(path); // removes the file again, never renames it
    std::FILE* f = std::fopen(probe.temporary().c_str(), "wb");
    if (!f)
        fail(path, "cannot write there");
    std::fclose(f);
}

} // namespace longrun::cli

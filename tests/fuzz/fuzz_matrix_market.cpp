// The bytes become a .mtx file, read as a ctmc and as a dtmc and validated the
// way `longrun convert` does. Input errors are the expected outcome; anything
// else that escapes (std::bad_alloc, std::length_error, a sanitizer report, an
// accepted chain that breaks its promises) is a finding.
#include "chain_invariants.hpp"

#include "io/chain_file.hpp"
#include "io/error.hpp"
#include "io/matrix_market.hpp"

#include <unistd.h>

#include <cstddef>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <string>

namespace {

// The reader takes a path, so each fuzzing process owns one scratch file.
const std::string& scratch_path() {
    static const std::string path = [] {
        const char* dir = std::getenv("TMPDIR");
        std::string pattern = std::string(dir && *dir ? dir : "/tmp") + "/longrun-fuzz-XXXXXX.mtx";
        const int fd = mkstemps(pattern.data(), 4);
        if (fd < 0) {
            std::perror("mkstemps");
            std::abort();
        }
        close(fd);
        std::atexit([] { unlink(scratch_path().c_str()); });
        return pattern;
    }();
    return path;
}

void write_scratch(const std::uint8_t* data, std::size_t size) {
    std::FILE* f = std::fopen(scratch_path().c_str(), "wb");
    if (!f || std::fwrite(data, 1, size, f) != size || std::fclose(f) != 0) {
        std::perror("scratch file");
        std::abort();
    }
}

void read_and_validate(const std::string& path, longrun::io::ChainKind kind, bool transposed) {
    longrun::io::Chain chain;
    try {
        chain = longrun::io::read_matrix_market(path, kind, {.transposed = transposed});
    } catch (const longrun::InputError&) {
        return;
    }
    for (const bool renormalize : {false, true}) {
        longrun::io::Chain copy = chain; // validation may rescale rows
        longrun::io::ValidationOptions options;
        options.renormalize = renormalize;
        longrun::io::ValidationReport report;
        if (!longrun::io::validate_slice(copy, path, options, report))
            longrun::fuzz::check_accepted(copy);
    }
}

} // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
    write_scratch(data, size);
    for (const auto kind : {longrun::io::ChainKind::ctmc, longrun::io::ChainKind::dtmc})
        for (const bool transposed : {false, true})
            read_and_validate(scratch_path(), kind, transposed);
    return 0;
}

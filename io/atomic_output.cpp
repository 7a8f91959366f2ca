#include "atomic_output.hpp"

#include "error.hpp"
#include "mpi_agree.hpp"

#include <fmt/format.h>

#include <cerrno>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <random>
#include <sys/stat.h>
#include <unistd.h>

namespace longrun::io {

namespace {

std::string temporary_name_for(const std::string& final_path) {
    const std::filesystem::path p(final_path);
    std::random_device rd;
    // fmt rather than chained operator+: GCC 12 warns falsely (-Wrestrict) on the latter.
    const auto name =
        fmt::format(".{}.tmp-{}-{}", p.filename().string(), ::getpid(), rd() % 1000000);
    return (p.parent_path() / name).string();
}

std::string kind_of(mode_t mode) {
    if (S_ISDIR(mode))
        return "a folder";
    if (S_ISCHR(mode) || S_ISBLK(mode))
        return "a device";
    if (S_ISFIFO(mode))
        return "a named pipe (fifo)";
    if (S_ISSOCK(mode))
        return "a socket";
    return "not a regular file";
}

// A link to a regular file is written through: its target is what the user means.
std::string through_link(std::string path) {
    std::error_code ec;
    if (!std::filesystem::is_symlink(std::filesystem::symlink_status(path, ec)) ||
        !std::filesystem::is_regular_file(std::filesystem::status(path, ec)))
        return path;
    auto target = std::filesystem::canonical(path, ec);
    return ec ? path : target.string();
}

} // namespace

std::string unreplaceable(const std::string& path) {
    struct stat at {};
    if (::lstat(path.c_str(), &at) != 0)
        return "";
    if (S_ISREG(at.st_mode))
        return "";
    if (S_ISLNK(at.st_mode)) {
        struct stat target {};
        if (::stat(path.c_str(), &target) != 0)
            return "a symbolic link to nothing";
        if (S_ISREG(target.st_mode))
            return "";
        return "a symbolic link to " + kind_of(target.st_mode);
    }
    return kind_of(at.st_mode);
}

AtomicOutput::AtomicOutput(std::string final_path)
    : final_(through_link(std::move(final_path))), temporary_(temporary_name_for(final_)) {}

AtomicOutput::AtomicOutput(std::string final_path, MPI_Comm comm)
    : final_(through_link(std::move(final_path))), comm_(comm) {
    if (comm_rank(comm) == 0)
        temporary_ = temporary_name_for(final_);
    unsigned long n = temporary_.size();
    MPI_Bcast(&n, 1, MPI_UNSIGNED_LONG, 0, comm);
    temporary_.resize(n);
    MPI_Bcast(temporary_.data(), static_cast<int>(n), MPI_CHAR, 0, comm);
}

AtomicOutput::~AtomicOutput() {
    if (committed_)
        return;
    if (!comm_ || comm_rank(*comm_) == 0)
        std::remove(temporary_.c_str());
}

void AtomicOutput::commit() {
    std::optional<LocalFault> fault;
    const bool renamer = !comm_ || comm_rank(*comm_) == 0;
    if (comm_)
        MPI_Barrier(*comm_); // all ranks have closed the file
    // The last line of defence (the command line refuses such outputs before any
    // work): rename would replace a device node or a fifo by the file.
    struct stat there {};
    if (renamer && ::lstat(final_.c_str(), &there) == 0 && !S_ISREG(there.st_mode)) {
        fault = LocalFault{
            0, ExitCode::output_failed,
            fmt::format("{}: not replaced: it is {}, and longrun replaces only "
                        "regular files",
                        final_,
                        S_ISLNK(there.st_mode) ? "a symbolic link" : kind_of(there.st_mode))};
        std::remove(temporary_.c_str());
    } else if (renamer && std::rename(temporary_.c_str(), final_.c_str()) != 0) {
        fault = LocalFault{
            0, ExitCode::output_failed,
            final_ + ": cannot move the finished file into place: " + std::strerror(errno)};
        std::remove(temporary_.c_str());
    }
    if (comm_)
        agree_or_throw(*comm_, fault);
    else if (fault)
        throw OutputError(fault->message);
    committed_ = true;
}

} // namespace longrun::io

#include "atomic_output.hpp"

#include "error.hpp"
#include "mpi_agree.hpp"

#include <fmt/format.h>

#include <cerrno>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <random>
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

} // namespace

AtomicOutput::AtomicOutput(std::string final_path)
    : final_(std::move(final_path)), temporary_(temporary_name_for(final_)) {}

AtomicOutput::AtomicOutput(std::string final_path, MPI_Comm comm)
    : final_(std::move(final_path)), comm_(comm) {
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
    if (renamer && std::rename(temporary_.c_str(), final_.c_str()) != 0) {
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

#include "iterate_file.hpp"

#include "atomic_output.hpp"
#include "chain_hash.hpp"
#include "hdf5.hpp"
#include "mpi_agree.hpp"

#include <fmt/format.h>

#include <cmath>
#include <optional>

namespace longrun::io {

void write_checkpoint(const std::string& path, MPI_Comm comm, const CheckpointInfo& info,
                      RowRange rows, const std::vector<double>& local) {
    AtomicOutput out(path, comm);
    std::optional<LocalFault> fault;
    try {
        h5::Handle f = h5::create_for_writing(out.temporary(), comm);
        h5::write_attribute(f, "schema", std::string(checkpoint_schema), path);
        h5::write_attribute(f, "chain_path", info.chain_path, path);
        if (!info.chain_hash.empty()) {
            h5::write_attribute(f, "chain_hash", info.chain_hash, path);
            h5::write_attribute(f, "chain_hash_method", std::string(chain_hash_method), path);
        }
        h5::write_attribute(f, "states", info.states, path);
        h5::write_attribute(f, "transitions", info.transitions, path);
        h5::write_attribute(f, "method", info.method, path);
        h5::write_attribute(f, "iteration", info.iteration, path);
        h5::write_attribute(f, "elapsed_seconds", info.elapsed_seconds, path);
        {
            // Closed before the file: parallel HDF5 refuses to close a file with open objects.
            h5::Handle d =
                h5::create_dataset(f, "distribution", H5T_NATIVE_DOUBLE, info.states, path);
            h5::write_range(d, H5T_NATIVE_DOUBLE, rows.begin, rows.size(), local.data(),
                            h5::Access::collective, path, "/distribution");
        }
        h5::close_written(f, path);
    } catch (const Error& e) {
        fault = LocalFault{0, e.code(), e.what()};
    }
    agree_or_throw(comm, fault);
    out.commit();
}

CheckpointInfo read_checkpoint_info(const std::string& path, MPI_Comm comm) {
    CheckpointInfo info;
    std::optional<LocalFault> fault;
    try {
        h5::Handle f = h5::open_for_reading(path, std::nullopt);
        const std::string schema =
            h5::has_attribute(f, "schema") ? h5::read_string_attribute(f, "schema", path, "/") : "";
        if (schema != checkpoint_schema)
            h5::fail(h5::Side::reading, path,
                     schema == "longrun.result"
                         ? "a result file, not a checkpoint (--start warm-starts from a result)"
                         : "not a longrun checkpoint (schema '" + schema + "')");
        info.chain_path = h5::read_string_attribute(f, "chain_path", path, "/");
        if (h5::has_attribute(f, "chain_hash"))
            info.chain_hash = h5::read_string_attribute(f, "chain_hash", path, "/");
        info.states = h5::read_u64_attribute(f, "states", path, "/");
        info.transitions = h5::read_u64_attribute(f, "transitions", path, "/");
        info.method = h5::read_string_attribute(f, "method", path, "/");
        info.iteration = h5::read_u64_attribute(f, "iteration", path, "/");
        info.elapsed_seconds = h5::read_f64_attribute(f, "elapsed_seconds", path, "/");
    } catch (const Error& e) {
        fault = LocalFault{0, e.code(), e.what()};
    }
    agree_or_throw(comm, fault);
    return info;
}

std::string read_recorded_chain_hash(const std::string& path, MPI_Comm comm) {
    std::string hash;
    std::optional<LocalFault> fault;
    if (comm_rank(comm) == 0) {
        try {
            h5::Handle f = h5::open_for_reading(path, std::nullopt);
            if (h5::has_attribute(f, "chain_hash"))
                hash = h5::read_string_attribute(f, "chain_hash", path, "/");
        } catch (const Error& e) {
            fault = LocalFault{0, e.code(), e.what()};
        }
    }
    agree_or_throw(comm, fault);
    std::uint64_t length = hash.size();
    MPI_Bcast(&length, 1, MPI_UINT64_T, 0, comm);
    hash.resize(length);
    MPI_Bcast(hash.data(), static_cast<int>(length), MPI_CHAR, 0, comm);
    return hash;
}

std::vector<double> read_distribution_slice(const std::string& path, MPI_Comm comm, RowRange rows,
                                            std::uint64_t states) {
    std::vector<double> local;
    std::optional<LocalFault> fault;
    try {
        h5::Handle f = h5::open_for_reading(path, std::nullopt);
        h5::Handle d = h5::open_dataset(f, "/distribution", path);
        const auto n = h5::length_1d(d, path, "/distribution");
        if (n != states)
            h5::fail(h5::Side::reading, path,
                     fmt::format("/distribution has {} entries, the chain {} states", n, states));
        local = h5::read_range<double>(d, rows.begin, rows.size(), h5::Access::serial, path,
                                       "/distribution");
        for (std::size_t i = 0; i < local.size(); ++i)
            if (!(local[i] >= 0) || !std::isfinite(local[i]))
                h5::fail(h5::Side::reading, path,
                         fmt::format("/distribution: row {}: {} is not a probability",
                                     rows.begin + i, local[i]));
    } catch (const Error& e) {
        fault = LocalFault{rows.begin, e.code(), e.what()};
    }
    agree_or_throw(comm, fault);
    double mine = 0, total = 0;
    for (double x : local)
        mine += x;
    MPI_Allreduce(&mine, &total, 1, MPI_DOUBLE, MPI_SUM, comm);
    if (!(total > 0) || !std::isfinite(total)) {
        Error e(ExitCode::bad_input, fmt::format("{}: /distribution sums to {}", path, total));
        e.mark_agreed();
        throw e;
    }
    return local;
}

} // namespace longrun::io

#include "hdf5.hpp"

#include "mpi_agree.hpp"

#include <algorithm>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <fcntl.h>
#include <filesystem>
#include <memory>
#include <sys/stat.h>
#include <sys/statvfs.h>
#include <unistd.h>

namespace longrun::h5 {

void silence_library_errors() {
    H5Eset_auto2(H5E_DEFAULT, nullptr, nullptr);
}

void fail(Side side, const std::string& file, const std::string& what) {
    const std::string message = file + ": " + what;
    if (side == Side::reading)
        throw InputError(message);
    throw OutputError(message);
}

namespace {

// errno right after the flush of the last file closed here; read by close_written.
int last_close_errno = 0;

// Why a write failed, in the system's words (ENOSPC, EDQUOT, EFBIG...): users must
// be able to tell a full disk from a bug. MPI-IO reports a failed write by an error
// code of its own and may leave errno cleared; a folder without a free block left
// is then a full disk.
std::string write_failure_reason(int error_number, const std::string& file) {
    if (error_number == 0) {
        const auto folder = std::filesystem::path(file).parent_path();
        struct statvfs space {};
        if (::statvfs(folder.empty() ? "." : folder.c_str(), &space) == 0 && space.f_bavail == 0)
            error_number = ENOSPC;
    }
    if (error_number == 0)
        return "the disk or quota may be full";
    return std::strerror(error_number);
}

// The communicator of a file opened through MPI-IO (HDF5 hands out a duplicate,
// freed on scope exit); empty for a serial file.
class FileComm {
  public:
    explicit FileComm(hid_t object) {
        Handle file(H5Iget_file_id(object), H5Fclose);
        if (!file.valid())
            return;
        Handle fapl(H5Fget_access_plist(file), H5Pclose);
        if (!fapl.valid() || H5Pget_driver(fapl) != H5FD_MPIO)
            return;
        MPI_Info info = MPI_INFO_NULL;
        if (H5Pget_fapl_mpio(fapl, &comm_, &info) < 0)
            comm_ = MPI_COMM_NULL;
        if (info != MPI_INFO_NULL)
            MPI_Info_free(&info);
    }
    FileComm(const FileComm&) = delete;
    FileComm& operator=(const FileComm&) = delete;
    ~FileComm() {
        if (comm_ != MPI_COMM_NULL)
            MPI_Comm_free(&comm_);
    }
    std::optional<MPI_Comm> get() const {
        return comm_ == MPI_COMM_NULL ? std::nullopt : std::optional<MPI_Comm>(comm_);
    }

  private:
    MPI_Comm comm_ = MPI_COMM_NULL;
};

// Writing to a file opened through MPI-IO is collective, but its failure need not
// be: one rank's share of the data may not fit, or one rank may flush metadata
// that the others do not. Every rank learns the outcome before any rank throws,
// so that none is left waiting in the next collective call; then all throw the
// same OutputError and unwind (closing their handles) together.
void settle_write(std::optional<MPI_Comm> comm, bool ok, int error_number, const std::string& file,
                  const std::string& what) {
    std::optional<LocalFault> fault;
    if (!ok)
        fault = LocalFault{0, ExitCode::output_failed,
                           file + ": " + what + ": " + write_failure_reason(error_number, file)};
    if (comm)
        agree_or_throw(*comm, fault);
    else if (fault)
        throw OutputError(fault->message);
}

// A failed write dooms the file: every writer here writes a temporary that is
// removed on failure. Its blocks are given back before anyone closes it, because
// closing still flushes HDF5's metadata into it; on a full disk that flush fails
// too, and HDF5 (1.10) then keeps a half-closed file that crashes it at exit.
// Collective with `comm`: rank 0 truncates, the others wait for it.
void give_back_space(hid_t object, std::optional<MPI_Comm> comm) {
    if (!comm || comm_rank(*comm) == 0) {
        const ssize_t length = H5Fget_name(object, nullptr, 0);
        if (length > 0) {
            std::string name(static_cast<std::size_t>(length) + 1, '\0');
            if (H5Fget_name(object, name.data(), name.size()) > 0)
                (void)::truncate(name.c_str(), 0);
        }
    }
    if (comm)
        MPI_Barrier(*comm);
}

// Space that a flush may allocate beyond the end of the file HDF5 has already
// laid out (free-space bookkeeping, a grown heap), on top of the metadata cache.
constexpr std::uint64_t flush_slack_bytes = 64 << 10;

// The name of an open file ("" when HDF5 cannot say).
std::string file_name(hid_t object) {
    const ssize_t length = H5Fget_name(object, nullptr, 0);
    if (length <= 0)
        return {};
    std::string name(static_cast<std::size_t>(length) + 1, '\0');
    if (H5Fget_name(object, name.data(), name.size()) <= 0)
        return {};
    name.resize(static_cast<std::size_t>(length));
    return name;
}

// A disk that fills during HDF5's own metadata flush cannot be handled there:
// under MPI-IO the rank whose write fails leaves the flush while the others wait
// in it, and a failed flush on close leaves HDF5 (1.10) a half-closed file that
// crashes it at exit. So the blocks the flush will write are reserved first: all
// of the file HDF5 has laid out (its end of allocation, which every piece of
// metadata still in the cache lies below), plus the cache's size and a slack for
// what the flush allocates itself. The file's length is not changed (the
// reservation lies beyond its end), and what is left over is given back after the
// close. Rank 0 reserves for the file, and every rank learns the outcome: the
// system's error number, 0 when reserved or when the file system cannot reserve
// (then the flush goes ahead unprotected, as it must).
int reserve_for_flush(hid_t file, std::optional<MPI_Comm> comm, std::string& name) {
    int error_number = 0;
    name = file_name(file);
    if (!comm || comm_rank(*comm) == 0) {
        // HDF5 tells its end of allocation only for serial files; under MPI-IO
        // the length written so far stands in for it, and the metadata that lies
        // beyond (at most the cache's worth, in aggregated blocks) is covered by
        // adding the cache's size and the slack.
        haddr_t end = 0;
        if (H5Fget_eoa(file, &end) < 0) {
            end = 0;
            H5Eclear2(H5E_DEFAULT);
        }
        struct stat now {};
        if (!name.empty() && ::stat(name.c_str(), &now) == 0)
            end = std::max<std::uint64_t>(end, static_cast<std::uint64_t>(now.st_size));
        std::size_t cache_max = 0, cache_min_clean = 0, cache_size = 0;
        int cache_entries = 0;
        if (H5Fget_mdc_size(file, &cache_max, &cache_min_clean, &cache_size, &cache_entries) < 0)
            cache_size = cache_max;
        const std::uint64_t length = end + cache_size + flush_slack_bytes;
        const int fd = name.empty() ? -1 : ::open(name.c_str(), O_WRONLY | O_CLOEXEC);
        if (fd >= 0) {
            if (::fallocate(fd, FALLOC_FL_KEEP_SIZE, 0, static_cast<off_t>(length)) != 0 &&
                errno != EOPNOTSUPP && errno != ENOSYS)
                error_number = errno;
            ::close(fd);
        }
    }
    if (comm)
        MPI_Bcast(&error_number, 1, MPI_INT, 0, *comm);
    return error_number;
}

// Blocks reserved beyond the end of a closed file go back to the file system
// (a truncation to the file's own length releases them).
void release_reservation(const std::string& name, std::optional<MPI_Comm> comm) {
    if (name.empty() || (comm && comm_rank(*comm) != 0))
        return;
    struct stat done {};
    if (::stat(name.c_str(), &done) == 0)
        (void)::truncate(name.c_str(), done.st_size);
}

// The closer of every file created for writing. HDF5 flushes metadata on close,
// and a close whose flush fails leaves HDF5 (1.10) a half-closed file that crashes
// it at exit. So the space for the flush is reserved first, the flush comes next,
// their outcome agreed among the ranks (closing is collective: they are all
// here), and after a failure the doomed file's blocks are given back before the
// close flushes again.
herr_t close_written_file(hid_t file) {
    const FileComm comm(file);
    std::string name;
    const int reserve_error = reserve_for_flush(file, comm.get(), name);
    int flushed = 0;
    if (reserve_error == 0) {
        errno = 0;
        flushed = H5Fflush(file, H5F_SCOPE_GLOBAL) >= 0;
        last_close_errno = errno;
    } else {
        last_close_errno = reserve_error;
    }
    if (comm.get())
        MPI_Allreduce(MPI_IN_PLACE, &flushed, 1, MPI_INT, MPI_LAND, *comm.get());
    if (!flushed)
        give_back_space(file, comm.get());
    const herr_t closed = H5Fclose(file);
    if (flushed && closed >= 0)
        release_reservation(name, comm.get());
    return flushed ? closed : herr_t(-1);
}

void settle_write(hid_t object, bool ok, int error_number, const std::string& file,
                  const std::string& what) {
    const FileComm comm(object);
    try {
        settle_write(comm.get(), ok, error_number, file, what);
    } catch (const Error&) { // agreed: every rank of the file is here
        give_back_space(object, comm.get());
        throw;
    }
}

Handle file_access(std::optional<MPI_Comm> comm, const std::string& file, Side side) {
    Handle fapl(H5Pcreate(H5P_FILE_ACCESS), H5Pclose);
    if (!fapl.valid())
        fail(side, file, "cannot create an HDF5 file-access property list");
    if (comm && H5Pset_fapl_mpio(fapl, *comm, MPI_INFO_NULL) < 0)
        fail(side, file, "cannot set up MPI-IO access");
    return fapl;
}

} // namespace

Handle open_for_reading(const std::string& path, std::optional<MPI_Comm> comm) {
    silence_library_errors();
    // H5Fis_accessible tells "not HDF5" apart from "cannot open".
    FILE* probe = std::fopen(path.c_str(), "rb");
    if (!probe)
        fail(Side::reading, path, "cannot open the file for reading (missing or no permission)");
    std::fclose(probe);
    Handle fapl = file_access(comm, path, Side::reading);
    if (H5Fis_hdf5(path.c_str()) <= 0)
        fail(Side::reading, path, "not an HDF5 file (or a truncated one)");
    Handle f(H5Fopen(path.c_str(), H5F_ACC_RDONLY, fapl), H5Fclose);
    if (!f.valid())
        fail(Side::reading, path, "HDF5 could not open the file (truncated or damaged?)");
    return f;
}

Handle create_for_writing(const std::string& path, std::optional<MPI_Comm> comm) {
    silence_library_errors();
    Handle fapl = file_access(comm, path, Side::writing);
    errno = 0;
    Handle f(H5Fcreate(path.c_str(), H5F_ACC_TRUNC, H5P_DEFAULT, fapl), close_written_file);
    const int error_number = errno;
    settle_write(comm, f.valid(), error_number, path,
                 "cannot create the file (folder missing or not writable?)");
    return f;
}

void close_written(Handle& file, const std::string& path) {
    if (file.close() < 0)
        fail(Side::writing, path,
             "cannot finish writing the file: " + write_failure_reason(last_close_errno, path));
}

bool exists(hid_t loc, const std::string& path) {
    // Walk the path so that a missing intermediate group is "absent", not an error.
    std::string::size_type pos = 0;
    while (true) {
        pos = path.find('/', pos + 1);
        const std::string prefix = path.substr(0, pos);
        if (!prefix.empty() && prefix != "/" && H5Lexists(loc, prefix.c_str(), H5P_DEFAULT) <= 0)
            return false;
        if (pos == std::string::npos)
            return true;
    }
}

Handle open_group(hid_t loc, const std::string& path, const std::string& file) {
    if (!exists(loc, path))
        fail(Side::reading, file, "group '" + path + "' is missing");
    Handle g(H5Gopen2(loc, path.c_str(), H5P_DEFAULT), H5Gclose);
    if (!g.valid())
        fail(Side::reading, file, "'" + path + "' is not a group");
    return g;
}

Handle open_dataset(hid_t loc, const std::string& path, const std::string& file) {
    if (!exists(loc, path))
        fail(Side::reading, file, "dataset '" + path + "' is missing");
    Handle d(H5Dopen2(loc, path.c_str(), H5P_DEFAULT), H5Dclose);
    if (!d.valid())
        fail(Side::reading, file, "'" + path + "' is not a dataset");
    return d;
}

Handle create_group(hid_t loc, const std::string& path, const std::string& file) {
    errno = 0;
    Handle g(H5Gcreate2(loc, path.c_str(), H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT), H5Gclose);
    const int error_number = errno;
    settle_write(loc, g.valid(), error_number, file, "cannot create group '" + path + "'");
    return g;
}

std::uint64_t length_1d(hid_t dataset, const std::string& file, const std::string& name) {
    Handle space(H5Dget_space(dataset), H5Sclose);
    if (!space.valid())
        fail(Side::reading, file, "cannot read the shape of dataset '" + name + "'");
    const int rank = H5Sget_simple_extent_ndims(space);
    if (rank != 1)
        fail(Side::reading, file,
             "dataset '" + name + "' has " + std::to_string(rank) +
                 " dimensions, expected a one-dimensional array");
    hsize_t dims[1] = {0};
    H5Sget_simple_extent_dims(space, dims, nullptr);
    return dims[0];
}

Numeric numeric_class(hid_t dataset) {
    Handle type(H5Dget_type(dataset), H5Tclose);
    switch (H5Tget_class(type)) {
    case H5T_INTEGER:
        return H5Tget_sign(type) == H5T_SGN_NONE ? Numeric::unsigned_integer
                                                 : Numeric::signed_integer;
    case H5T_FLOAT:
        return Numeric::floating;
    default:
        return Numeric::other;
    }
}

std::size_t element_size(hid_t dataset) {
    Handle type(H5Dget_type(dataset), H5Tclose);
    return H5Tget_size(type);
}

std::optional<std::string> missing_storage(hid_t dataset) {
    Handle space(H5Dget_space(dataset), H5Sclose);
    const int rank = H5Sget_simple_extent_ndims(space);
    if (rank != 1 || H5Sget_simple_extent_npoints(space) == 0)
        return std::nullopt; // shapes are judged elsewhere; an empty array stores nothing
    hsize_t length = 0;
    H5Sget_simple_extent_dims(space, &length, nullptr);
    Handle dcpl(H5Dget_create_plist(dataset), H5Pclose);
    switch (H5Pget_layout(dcpl)) {
    case H5D_COMPACT:
        return std::nullopt;
    case H5D_CONTIGUOUS: {
        H5D_space_status_t status{};
        if (H5Dget_space_status(dataset, &status) < 0 || status != H5D_SPACE_STATUS_ALLOCATED)
            return "has no data stored in the file (it was never written)";
        return std::nullopt;
    }
    case H5D_CHUNKED: {
        hsize_t chunk = 0;
        hsize_t stored = 0;
        if (H5Pget_chunk(dcpl, 1, &chunk) != 1 || chunk == 0 ||
            H5Dget_num_chunks(dataset, space, &stored) < 0)
            return "has a chunk index HDF5 cannot read";
        const hsize_t needed = length / chunk + (length % chunk != 0);
        if (stored < needed)
            return "holds " + std::to_string(stored) + " of its " + std::to_string(needed) +
                   " chunks; the others were never written";
        return std::nullopt;
    }
    default:
        return "is a virtual dataset (its data lives in other files), which longrun does not "
               "read";
    }
}

bool has_attribute(hid_t loc, const std::string& name) {
    return H5Aexists(loc, name.c_str()) > 0;
}

namespace {

Handle open_attribute(hid_t loc, const std::string& name, const std::string& file,
                      const std::string& object) {
    if (!has_attribute(loc, name))
        fail(Side::reading, file, "attribute '" + name + "' of '" + object + "' is missing");
    Handle a(H5Aopen(loc, name.c_str(), H5P_DEFAULT), H5Aclose);
    if (!a.valid())
        fail(Side::reading, file, "cannot open attribute '" + name + "' of '" + object + "'");
    return a;
}

std::uint64_t attribute_elements(hid_t attr) {
    Handle space(H5Aget_space(attr), H5Sclose);
    const hssize_t n = H5Sget_simple_extent_npoints(space);
    return n < 0 ? 0 : static_cast<std::uint64_t>(n);
}

} // namespace

std::string read_string_attribute(hid_t loc, const std::string& name, const std::string& file,
                                  const std::string& object) {
    auto list = read_string_list_attribute(loc, name, file, object);
    if (list.size() != 1)
        fail(Side::reading, file,
             "attribute '" + name + "' of '" + object + "' should hold one string");
    return list.front();
}

std::vector<std::string> read_string_list_attribute(hid_t loc, const std::string& name,
                                                    const std::string& file,
                                                    const std::string& object) {
    Handle a = open_attribute(loc, name, file, object);
    Handle type(H5Aget_type(a), H5Tclose);
    if (H5Tget_class(type) != H5T_STRING)
        fail(Side::reading, file, "attribute '" + name + "' of '" + object + "' is not text");
    const std::uint64_t n = attribute_elements(a);
    if (n > (1u << 20))
        fail(Side::reading, file, "attribute '" + name + "' of '" + object + "' is too large");
    std::vector<std::string> out;
    if (H5Tis_variable_str(type) > 0) {
        Handle mem(H5Tcopy(H5T_C_S1), H5Tclose);
        H5Tset_size(mem, H5T_VARIABLE);
        H5Tset_cset(mem, H5Tget_cset(type));
        std::vector<char*> raw(n, nullptr);
        if (H5Aread(a, mem, raw.data()) < 0)
            fail(Side::reading, file, "cannot read attribute '" + name + "' of '" + object + "'");
        for (char* s : raw)
            out.emplace_back(s ? s : "");
        Handle space(H5Aget_space(a), H5Sclose);
        H5Dvlen_reclaim(mem, space, H5P_DEFAULT, raw.data());
    } else {
        const std::size_t width = H5Tget_size(type);
        std::vector<char> raw(n * width + 1, '\0');
        if (H5Aread(a, type, raw.data()) < 0)
            fail(Side::reading, file, "cannot read attribute '" + name + "' of '" + object + "'");
        for (std::uint64_t i = 0; i < n; ++i) {
            const char* s = raw.data() + i * width;
            out.emplace_back(s, strnlen(s, width));
        }
    }
    return out;
}

std::uint64_t read_u64_attribute(hid_t loc, const std::string& name, const std::string& file,
                                 const std::string& object) {
    Handle a = open_attribute(loc, name, file, object);
    Handle type(H5Aget_type(a), H5Tclose);
    if (H5Tget_class(type) != H5T_INTEGER || attribute_elements(a) != 1)
        fail(Side::reading, file,
             "attribute '" + name + "' of '" + object + "' should be one integer");
    std::int64_t as_signed = 0;
    std::uint64_t value = 0;
    if (H5Tget_sign(type) == H5T_SGN_NONE) {
        if (H5Aread(a, H5T_NATIVE_UINT64, &value) < 0)
            fail(Side::reading, file, "cannot read attribute '" + name + "'");
    } else {
        if (H5Aread(a, H5T_NATIVE_INT64, &as_signed) < 0)
            fail(Side::reading, file, "cannot read attribute '" + name + "'");
        if (as_signed < 0)
            fail(Side::reading, file,
                 "attribute '" + name + "' of '" + object + "' is negative (" +
                     std::to_string(as_signed) + ")");
        value = static_cast<std::uint64_t>(as_signed);
    }
    return value;
}

double read_f64_attribute(hid_t loc, const std::string& name, const std::string& file,
                          const std::string& object) {
    Handle a = open_attribute(loc, name, file, object);
    Handle type(H5Aget_type(a), H5Tclose);
    const auto cls = H5Tget_class(type);
    if ((cls != H5T_INTEGER && cls != H5T_FLOAT) || attribute_elements(a) != 1)
        fail(Side::reading, file,
             "attribute '" + name + "' of '" + object + "' should be a number");
    double value = 0;
    if (H5Aread(a, H5T_NATIVE_DOUBLE, &value) < 0)
        fail(Side::reading, file, "cannot read attribute '" + name + "'");
    return value;
}

namespace {

void write_raw_attribute(hid_t loc, const std::string& name, hid_t type, const void* value,
                         const std::string& file) {
    if (has_attribute(loc, name))
        H5Adelete(loc, name.c_str());
    Handle space(H5Screate(H5S_SCALAR), H5Sclose);
    errno = 0;
    Handle a(H5Acreate2(loc, name.c_str(), type, space, H5P_DEFAULT, H5P_DEFAULT), H5Aclose);
    const bool ok = a.valid() && H5Awrite(a, type, value) >= 0;
    const int error_number = errno;
    settle_write(loc, ok, error_number, file, "cannot write attribute '" + name + "'");
}

} // namespace

void write_attribute(hid_t loc, const std::string& name, const std::string& value,
                     const std::string& file) {
    write_attribute(loc, name, std::vector<std::string>{value}, file);
}

void write_attribute(hid_t loc, const std::string& name, std::uint64_t value,
                     const std::string& file) {
    write_raw_attribute(loc, name, H5T_NATIVE_UINT64, &value, file);
}

void write_attribute(hid_t loc, const std::string& name, std::int64_t value,
                     const std::string& file) {
    write_raw_attribute(loc, name, H5T_NATIVE_INT64, &value, file);
}

void write_attribute(hid_t loc, const std::string& name, double value, const std::string& file) {
    write_raw_attribute(loc, name, H5T_NATIVE_DOUBLE, &value, file);
}

void write_attribute(hid_t loc, const std::string& name, const std::vector<std::string>& values,
                     const std::string& file) {
    if (has_attribute(loc, name))
        H5Adelete(loc, name.c_str());
    Handle type(H5Tcopy(H5T_C_S1), H5Tclose);
    H5Tset_size(type, H5T_VARIABLE);
    H5Tset_cset(type, H5T_CSET_UTF8);
    // A single string is stored as a scalar so that tools show it as plain text.
    Handle space = values.size() == 1 ? Handle(H5Screate(H5S_SCALAR), H5Sclose) : [&] {
        hsize_t n = values.size();
        return Handle(H5Screate_simple(1, &n, nullptr), H5Sclose);
    }();
    std::vector<const char*> raw;
    for (const auto& v : values)
        raw.push_back(v.c_str());
    errno = 0;
    Handle a(H5Acreate2(loc, name.c_str(), type, space, H5P_DEFAULT, H5P_DEFAULT), H5Aclose);
    const bool ok = a.valid() && H5Awrite(a, type, raw.data()) >= 0;
    const int error_number = errno;
    settle_write(loc, ok, error_number, file, "cannot write attribute '" + name + "'");
}

namespace {

Handle transfer_list(Access access) {
    Handle dxpl(H5Pcreate(H5P_DATASET_XFER), H5Pclose);
    if (access == Access::collective)
        H5Pset_dxpl_mpio(dxpl, H5FD_MPIO_COLLECTIVE);
    return dxpl;
}

// Selects [offset, offset + count) in the file and a matching memory space; an
// empty selection still lets a rank take part in a collective transfer.
std::pair<Handle, Handle> select_range(hid_t dataset, std::uint64_t offset, std::uint64_t count) {
    Handle filespace(H5Dget_space(dataset), H5Sclose);
    hsize_t n = count;
    Handle memspace(H5Screate_simple(1, &n, nullptr), H5Sclose);
    if (count == 0) {
        H5Sselect_none(filespace);
        H5Sselect_none(memspace);
    } else {
        hsize_t start = offset;
        H5Sselect_hyperslab(filespace, H5S_SELECT_SET, &start, nullptr, &n, nullptr);
    }
    return {std::move(filespace), std::move(memspace)};
}

// A dataset of no elements has no storage address, and parallel HDF5 (1.10)
// fails a collective transfer on it even with an empty selection. Its extent is
// the same on every rank, so every rank skips alike.
bool holds_no_elements(hid_t dataset) {
    Handle space(H5Dget_space(dataset), H5Sclose);
    return H5Sget_simple_extent_npoints(space) == 0;
}

} // namespace

namespace {

// Whether the last failed call on this thread failed a Fletcher32 check
// (HDF5 reports it as a read error of its storage, "data error detected by
// Fletcher32 checksum"). A C callback: it only looks, and never throws.
bool checksum_failed() {
    bool found = false;
    auto look = [](unsigned, const H5E_error2_t* e, void* out) -> herr_t {
        if (e && e->desc && std::strstr(e->desc, "Fletcher32") != nullptr)
            *static_cast<bool*>(out) = true;
        return 0;
    };
    H5Ewalk2(H5E_DEFAULT, H5E_WALK_DOWNWARD, look, &found);
    return found;
}

} // namespace

void read_range(hid_t dataset, hid_t memtype, std::uint64_t offset, std::uint64_t count, void* out,
                Access access, const std::string& file, const std::string& name) {
    if (count == 0 && holds_no_elements(dataset))
        return;
    auto [filespace, memspace] = select_range(dataset, offset, count);
    Handle dxpl = transfer_list(access);
    if (H5Dread(dataset, memtype, memspace, filespace, dxpl, out) < 0) {
        const std::string elements = std::to_string(offset) + ".." + std::to_string(offset + count);
        if (checksum_failed())
            fail(Side::reading, file,
                 "dataset '" + name + "': a chunk holding elements among " + elements +
                     " fails its checksum (the file was damaged after it was written; copy it "
                     "again or write it anew)");
        fail(Side::reading, file,
             "cannot read elements " + elements + " of dataset '" + name +
                 "' (truncated file or unconvertible type?)");
    }
}

Handle create_dataset(hid_t loc, const std::string& name, hid_t filetype, std::uint64_t length,
                      const std::string& file, Layout layout) {
    hsize_t n = length;
    Handle space(H5Screate_simple(1, &n, nullptr), H5Sclose);
    Handle dcpl(H5Pcreate(H5P_DATASET_CREATE), H5Pclose);
    // Parallel HDF5 (1.10) writes filtered chunks through a collective path that
    // does not return on every rank when one rank's write fails (a full disk then
    // hangs the job instead of ending it with exit 6). Files written by several
    // ranks at once keep the contiguous layout, whose failures settle_write agrees.
    const FileComm comm(loc);
    int ranks = 1;
    if (comm.get())
        MPI_Comm_size(*comm.get(), &ranks);
    if (ranks > 1)
        layout = Layout{0, 0, false};
    const bool chunked = layout.checksum || layout.deflate > 0 || layout.chunk > 0;
    if (chunked && length > 0) {
        hsize_t chunk =
            std::min<std::uint64_t>(layout.chunk > 0 ? layout.chunk : default_chunk, length);
        H5Pset_chunk(dcpl, 1, &chunk);
        // Every element is written, so fill values would only be extra writes;
        // parallel HDF5 1.10 cannot write them into filtered chunks anyway.
        H5Pset_fill_time(dcpl, H5D_FILL_TIME_NEVER);
        // Checksum last: it then covers the bytes as stored, compressed or not.
        if (layout.deflate > 0)
            H5Pset_deflate(dcpl, static_cast<unsigned>(layout.deflate));
        if (layout.checksum)
            H5Pset_fletcher32(dcpl);
    }
    errno = 0;
    Handle d(H5Dcreate2(loc, name.c_str(), filetype, space, H5P_DEFAULT, dcpl, H5P_DEFAULT),
             H5Dclose);
    const int error_number = errno;
    settle_write(loc, d.valid(), error_number, file, "cannot create dataset '" + name + "'");
    return d;
}

void write_range(hid_t dataset, hid_t memtype, std::uint64_t offset, std::uint64_t count,
                 const void* data, Access access, const std::string& file,
                 const std::string& name) {
    if (count == 0 && holds_no_elements(dataset))
        return;
    auto [filespace, memspace] = select_range(dataset, offset, count);
    Handle dxpl = transfer_list(access);
    errno = 0;
    const bool ok = H5Dwrite(dataset, memtype, memspace, filespace, dxpl, data) >= 0;
    const int error_number = errno;
    const std::string what = "cannot write dataset '" + name + "'";
    if (access == Access::collective)
        settle_write(dataset, ok, error_number, file, what);
    else
        settle_write(std::nullopt, ok, error_number, file, what);
}

} // namespace longrun::h5

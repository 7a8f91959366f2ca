// Thin RAII wrappers over the HDF5 C API. A failed call becomes a typed exception
// that names the file and the object; HDF5's own error stack printing is switched
// off so that users see one line, not a page of library internals.
#pragma once

#include "error.hpp"

#include <hdf5.h>
#include <mpi.h>

#include <cstdint>
#include <optional>
#include <string>
#include <type_traits>
#include <vector>

namespace longrun::h5 {

// Silences HDF5's automatic error printing for the whole process; idempotent.
void silence_library_errors();

class Handle {
  public:
    Handle() = default;
    Handle(hid_t id, herr_t (*closer)(hid_t)) : id_(id), closer_(closer) {}
    Handle(const Handle&) = delete;
    Handle& operator=(const Handle&) = delete;
    Handle(Handle&& o) noexcept : id_(o.id_), closer_(o.closer_) { o.id_ = H5I_INVALID_HID; }
    Handle& operator=(Handle&& o) noexcept {
        if (this != &o) {
            reset();
            id_ = o.id_;
            closer_ = o.closer_;
            o.id_ = H5I_INVALID_HID;
        }
        return *this;
    }
    ~Handle() { reset(); }
    hid_t get() const noexcept { return id_; }
    operator hid_t() const noexcept { return id_; }
    bool valid() const noexcept { return id_ >= 0; }
    // Closes now and reports failure (a late write error on close is still a write error).
    herr_t close() noexcept {
        herr_t status = 0;
        if (id_ >= 0 && closer_)
            status = closer_(id_);
        id_ = H5I_INVALID_HID;
        return status;
    }

  private:
    void reset() noexcept { (void)close(); }
    hid_t id_ = H5I_INVALID_HID;
    herr_t (*closer_)(hid_t) = nullptr;
};

// Errors raised while reading are the user's input problem (exit 2); while
// writing, our output problem (exit 6).
enum class Side { reading, writing };

[[noreturn]] void fail(Side side, const std::string& file, const std::string& what);

enum class Access { serial, collective };

// Opens for reading. With `comm` the file is opened collectively through MPI-IO.
Handle open_for_reading(const std::string& path, std::optional<MPI_Comm> comm);
// Creates (truncating) for writing. With `comm`, collectively through MPI-IO.
// Every writer here writes a temporary (io/atomic_output.hpp): on a failed write
// the file's contents are given up so that it can still be closed.
Handle create_for_writing(const std::string& path, std::optional<MPI_Comm> comm);
// Closes a file from create_for_writing (collective like its creation); throws
// OutputError naming `path` and the system's reason when the last writes fail.
void close_written(Handle& file, const std::string& path);

bool exists(hid_t loc, const std::string& path);
Handle open_group(hid_t loc, const std::string& path, const std::string& file);
Handle open_dataset(hid_t loc, const std::string& path, const std::string& file);
Handle create_group(hid_t loc, const std::string& path, const std::string& file);

// Shape of a dataset; throws unless it is one-dimensional.
std::uint64_t length_1d(hid_t dataset, const std::string& file, const std::string& name);

enum class Numeric { unsigned_integer, signed_integer, floating, other };
Numeric numeric_class(hid_t dataset);
// Bytes per element as stored in the file.
std::size_t element_size(hid_t dataset);

// Chunks that were never written read back as the fill value, so a file of a
// few KiB can announce an array of 2^40 elements. Returns what is missing
// (e.g. "holds 1 of its 1073741825 chunks"), or nothing when every element is
// stored in the file.
std::optional<std::string> missing_storage(hid_t dataset);

// Attributes.
bool has_attribute(hid_t loc, const std::string& name);
std::string read_string_attribute(hid_t loc, const std::string& name, const std::string& file,
                                  const std::string& object);
std::uint64_t read_u64_attribute(hid_t loc, const std::string& name, const std::string& file,
                                 const std::string& object);
double read_f64_attribute(hid_t loc, const std::string& name, const std::string& file,
                          const std::string& object);
std::vector<std::string> read_string_list_attribute(hid_t loc, const std::string& name,
                                                    const std::string& file,
                                                    const std::string& object);

void write_attribute(hid_t loc, const std::string& name, const std::string& value,
                     const std::string& file);
void write_attribute(hid_t loc, const std::string& name, std::uint64_t value,
                     const std::string& file);
void write_attribute(hid_t loc, const std::string& name, std::int64_t value,
                     const std::string& file);
void write_attribute(hid_t loc, const std::string& name, double value, const std::string& file);
void write_attribute(hid_t loc, const std::string& name, const std::vector<std::string>& values,
                     const std::string& file);

template <class T>
hid_t native_type() {
    if constexpr (std::is_same_v<T, double>)
        return H5T_NATIVE_DOUBLE;
    else if constexpr (std::is_same_v<T, std::uint64_t>)
        return H5T_NATIVE_UINT64;
    else if constexpr (std::is_same_v<T, std::int64_t>)
        return H5T_NATIVE_INT64;
    else if constexpr (std::is_same_v<T, std::uint16_t>)
        return H5T_NATIVE_UINT16;
    else
        static_assert(sizeof(T) == 0, "no HDF5 type for this element type");
}

// Reads elements [offset, offset + count) of a 1-d dataset. With Access::collective
// every rank of the file's communicator must call, also with count == 0. A chunk
// that fails its checksum is InputError naming the file, the dataset and the
// elements, as damage (not as a format problem).
void read_range(hid_t dataset, hid_t memtype, std::uint64_t offset, std::uint64_t count, void* out,
                Access access, const std::string& file, const std::string& name);

template <class T>
std::vector<T> read_range(hid_t dataset, std::uint64_t offset, std::uint64_t count, Access access,
                          const std::string& file, const std::string& name) {
    std::vector<T> out(count);
    read_range(dataset, native_type<T>(), offset, count, out.data(), access, file, name);
    return out;
}

// Every dataset longrun writes from one process is chunked and carries a
// Fletcher32 checksum per chunk, which HDF5 verifies on every read: a bit flipped
// on disk or in transfer is refused instead of solved (files written by several
// ranks at once stay contiguous: see create_dataset). 2^17 elements make chunks of 1 MiB for 8-byte
// values, as large as HDF5's default chunk cache, so a rank's partial first and
// last chunk are each read and verified once.
inline constexpr std::uint64_t default_chunk = std::uint64_t{1} << 17;

struct Layout {
    std::uint64_t chunk = 0; // elements per chunk; 0: default_chunk
    int deflate = 0;         // 0: no compression; 1-9
    // Off only to measure what the checksums cost (benchmarks); without a
    // checksum, deflate or chunk length the dataset is stored contiguous.
    bool checksum = true;
};

Handle create_dataset(hid_t loc, const std::string& name, hid_t filetype, std::uint64_t length,
                      const std::string& file, Layout layout = {});

// Writes elements [offset, offset + count); collective when access says so.
void write_range(hid_t dataset, hid_t memtype, std::uint64_t offset, std::uint64_t count,
                 const void* data, Access access, const std::string& file, const std::string& name);

template <class T>
void write_whole(hid_t loc, const std::string& name, const std::vector<T>& data,
                 const std::string& file, Layout layout = {}) {
    Handle d = create_dataset(loc, name, native_type<T>(), data.size(), file, layout);
    write_range(d, native_type<T>(), 0, data.size(), data.data(), Access::serial, file, name);
}

} // namespace longrun::h5

// Chain file (HDF5, schema "longrun.chain" version 1) reading and writing.
// Reading follows PETSc's parallel HDF5 matrix reader: each rank reads its own
// slice of the row pointer, then exactly the targets and weights those rows
// point at, all with collective MPI-IO (ranks with no rows still take part).
#pragma once

#include "chain.hpp"
#include "hdf5.hpp"
#include "mpi_agree.hpp"

#include <mpi.h>

#include <string>

namespace longrun::io {

inline constexpr const char* chain_schema = "longrun.chain";
inline constexpr std::uint64_t chain_schema_version = 1;

struct ChainHeader {
    std::string path;
    ChainKind kind = ChainKind::ctmc;
    std::uint64_t states = 0;
    std::uint64_t transitions = 0;
    std::vector<std::string> event_names;
    bool has_events = false;
    std::vector<StateVariable> variables; // names, types and bounds; no values
    std::vector<std::string> measures;
    std::vector<std::string> intensities; // /events/<name>, in the order they were written
    // /model (from `generate`), small enough that every rank keeps a copy.
    std::string model_file, model_text;
    std::vector<std::pair<std::string, double>> parameters;
};

struct ValidationOptions {
    double row_sum_tolerance = 1e-8; // dtmc: |sum_j p_ij - 1| allowed per row (and rescaled away)
    bool renormalize = false;        // dtmc: rescale rows instead of rejecting them
};

// What validation saw and did; reduced over all ranks by read_chain_slice.
struct ValidationReport {
    std::uint64_t ctmc_self_loops = 0;   // ignored: a rate from a state to itself does nothing
    std::uint64_t explicit_zeros = 0;    // zero weights present in the file
    std::uint64_t renormalized_rows = 0; // dtmc rows rescaled on request
    double largest_correction = 0;       // max |row sum - 1| among them
};

// Collective over comm (every rank gets the same header).
ChainHeader read_chain_header(const std::string& path, MPI_Comm comm);

// Collective: offsets[rows.begin .. rows.end] (rows.size() + 1 values, global).
std::vector<std::uint64_t> read_offsets(const ChainHeader& header, RowRange rows, MPI_Comm comm);

// Collective: the rows' CSR, events, state variables, measures and event
// intensities, validated; the /model parts are copied from the header.
// Errors are agreed across ranks (the lowest offending row is reported).
Chain read_chain_slice(const ChainHeader& header, RowRange rows, MPI_Comm comm,
                       const ValidationOptions& options, ValidationReport* report = nullptr);

// Serial convenience: header + every row on this process alone.
Chain read_whole_chain(const std::string& path, const ValidationOptions& options,
                       ValidationReport* report = nullptr);

// Serial: writes a whole chain (rows must be [0, states)) under a temporary name
// in the same folder, then renames it. Writes what it is given, unvalidated, so
// that tests can make broken files with it too.
void write_chain_file(const std::string& path, const Chain& chain, h5::Layout layout = {});

// Checks the slice in memory (also used on chains built from Matrix Market).
// Returns the first fault of the slice (row is global); may renormalize rows.
std::optional<LocalFault> validate_slice(Chain& chain, const std::string& file,
                                         const ValidationOptions& options,
                                         ValidationReport& report);

} // namespace longrun::io

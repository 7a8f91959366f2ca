// The content hash of a chain: what a result, or a checkpoint, records so that it
// is never paired with a chain that changed after the solve.
//
// It covers every value the chain file gives longrun: kind, states, transitions,
// the transitions themselves (row, target, weight and event label, which fix
// /chain/offsets, /chain/targets, /chain/weights and /chain/events), event names,
// the state variables (names, integer or not, bounds, values), the measures and
// the event intensities (names and values). Not /model: its text and parameters
// describe where the chain came from, and a chain regenerated from a reworded
// model is still the same chain.
//
// Values are hashed as longrun reads them (a u32 target and a u64 target are the
// same number), so the storage (chunking, compression, integer widths) does not
// change the hash, and neither does the number of ranks that read it: each
// transition and each per-state value is hashed with its global row, and the
// hashes are summed modulo 2^64 in two independent 64-bit lanes, a sum that
// does not depend on who added which term. Each term is a chain of bijective
// 64-bit mixers (splitmix64's finalizer) over (row, target, weight bits, label),
// so changing one value always changes that term, never by chance leaving it
// alone; several changes cancel in both lanes with probability about 2^-128 for
// data not built to collide. It guards against mix-ups and stale files, not
// against anyone forging a chain to collide (that needs a cryptographic hash).
#pragma once

#include "chain.hpp"

#include <mpi.h>

#include <cstdint>
#include <optional>
#include <string>

namespace longrun::io {

// Stored beside the hash so that a later longrun can tell which rule made it.
inline constexpr const char* chain_hash_method =
    "longrun-content-1: 128-bit sum mod 2^64 per lane of splitmix64-mixed terms, one per "
    "transition (row, target, weight, label) and per state value, with the header's names, "
    "bounds and sizes";

// Collective over comm: the hash of the chain whose rows are spread over the
// ranks as `slice` (raw values, as read from the file and before validation
// rescales any row). 32 hexadecimal digits; the same on every rank.
std::string chain_content_hash(const Chain& slice, MPI_Comm comm);

// What a file records about the chain it was made from, against the chain at hand.
enum class ChainMatch { same, differs, not_recorded };
ChainMatch match_chain(const std::string& recorded, const std::string& actual);

// One line: "RECORD: made from a chain with content hash H1, but CHAIN has H2 ...".
std::string chain_changed_message(const std::string& record_path, const std::string& recorded,
                                  const std::string& chain_path, const std::string& actual,
                                  const std::string& remedy);

// Rank 0 of comm prints one line on stderr: `path` (a result or checkpoint
// written before longrun recorded content hashes) was paired with the chain by
// `matched_by` alone. Printed even under --quiet: it says how far to trust it.
void note_unrecorded_chain(MPI_Comm comm, const std::string& path, const std::string& why,
                           const std::string& matched_by);

} // namespace longrun::io

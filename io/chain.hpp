// The in-memory form of a chain file (schema v1, see DESIGN.md): either the whole
// chain (rows = [0, states)) or the slice of source-state rows one rank owns.
#pragma once

#include "../partition/row_range.hpp"

#include <cstdint>
#include <optional>
#include <string>
#include <utility>
#include <vector>

namespace longrun::io {

enum class ChainKind { ctmc, dtmc };

std::string to_string(ChainKind kind);
std::optional<ChainKind> parse_kind(const std::string& text);

struct StateVariable {
    std::string name;
    bool integral = true;               // stored as i64 (true) or f64 (false)
    std::vector<double> values;         // one per row of the slice; integers exact up to 2^53
    std::optional<double> lower, upper; // declared bounds, if any
};

struct Measure {
    std::string name;
    std::vector<double> values; // one per row of the slice
};

struct Chain {
    ChainKind kind = ChainKind::ctmc;
    std::uint64_t states = 0;      // of the whole chain
    std::uint64_t transitions = 0; // of the whole chain
    RowRange rows;                 // the rows held here
    // CSR of the rows held here, row = source state. offsets has rows.size() + 1
    // entries and starts at 0; targets are global state indices.
    std::vector<std::uint64_t> offsets{0};
    std::vector<std::uint64_t> targets;
    std::vector<double> weights;
    std::vector<std::uint16_t> events; // empty, or one label index per transition
    std::vector<std::string> event_names;
    std::vector<StateVariable> variables;
    std::vector<Measure> measures;
    // Written by `generate` (absent in chains from other tools): the model's
    // parameters, and per event the rate (ctmc) or probability (dtmc) with which
    // it fires in each state, firings that leave the state unchanged included
    // (an arrival lost at a full queue), so that event rates need no labels.
    std::vector<std::pair<std::string, double>> parameters;
    std::vector<Measure> event_intensities; // Measure::name = event name
    std::string model_file, model_text;     // the description it was generated from
    // Of the whole chain as read from its file (io/chain_hash.hpp); empty for a
    // chain built in memory (Matrix Market, generate) until it is written and read.
    std::string content_hash;

    std::uint64_t local_rows() const noexcept { return rows.size(); }
    std::uint64_t local_transitions() const noexcept { return targets.size(); }
};

// Builds a whole chain from (source, target, weight) triples in any order;
// duplicates are kept as they are (validation reports them).
Chain chain_from_triples(ChainKind kind, std::uint64_t states, std::vector<std::uint64_t> sources,
                         std::vector<std::uint64_t> targets, std::vector<double> weights);

} // namespace longrun::io

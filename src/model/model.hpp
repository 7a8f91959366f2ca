// A model description as read from its file, before anything is compiled or
// explored. Every piece of text keeps the line it came from, so that an error
// found much later (an expression that does not compile, an update that leaves
// its bounds) can still point the user at the right line of the model file.
#pragma once

#include "io/chain.hpp"

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

namespace longrun::model {

struct Where {
    std::string file;
    int line = 0; // 1-based; 0 when unknown

    std::string prefix() const {
        return line > 0 ? file + ":" + std::to_string(line) + ": " : file + ": ";
    }
};

struct Text {
    std::string expression;
    Where where;
};

struct Parameter {
    std::string name;
    double value = 0;
    Where where;
};

struct Variable {
    std::string name;
    std::int64_t lower = 0, upper = 0;
    Where where;
};

struct Update {
    std::size_t variable = 0; // index into Model::variables
    Text value;
};

struct Event {
    std::string name;
    std::optional<Text> guard; // absent: always enabled
    Text rate;                 // ctmc: a rate; dtmc: a probability
    std::vector<Update> updates;
    Where where;
};

struct Measure {
    std::string name;
    Text value;
};

// What a dtmc does with the probability its events leave unassigned in a state.
enum class Leftover { refuse, stay };

struct Model {
    std::string file;
    std::string text; // the description as written, stored with the chain it generates
    io::ChainKind kind = io::ChainKind::ctmc;
    std::vector<Parameter> parameters; // values final: overrides and derived values applied
    std::vector<Variable> variables;   // in declared order: the packing and /states order
    std::vector<std::int64_t> start;   // one per variable
    std::vector<Event> events;
    std::vector<Measure> measures;
    std::optional<Text> absorbing; // ctmc states meant to have no way out
    Leftover leftover = Leftover::refuse;
    Where leftover_where;
};

// The event label written for merged transitions from different events.
inline constexpr const char* several_events_label = "several";

} // namespace longrun::model

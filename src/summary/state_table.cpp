#include "state_table.hpp"

#include "expression_error.hpp"
#include "io/error.hpp"
#include "model/expression.hpp"

#include <fmt/format.h>
#include <fmt/ranges.h>

#include <algorithm>
#include <stdexcept>

namespace longrun::summary {

namespace {

// A column muparser cannot name (a measure called "p(full)") stays readable by
// column() but is left out of expressions instead of failing every expression.
bool nameable(const std::string& name) {
    return model::is_identifier(name) && !model::is_reserved_name(name);
}

} // namespace

StateTable::StateTable(const io::Chain& chain) : rows_(chain.local_rows()) {
    for (const auto& v : chain.variables) {
        names_.push_back(v.name);
        columns_.push_back(v.values);
        integral_.push_back(v.integral);
    }
    // Whether a measure is integer-valued depends on the rows of every rank;
    // summarize_measure decides that with a reduction, so locally it is "not declared".
    for (const auto& m : chain.measures) {
        names_.push_back(m.name);
        columns_.push_back(m.values);
        integral_.push_back(false);
    }
    for (const auto& column : columns_)
        if (column.size() != rows_)
            throw InputError(fmt::format("a state variable or measure has {} values for {} rows",
                                         column.size(), rows_));
    for (const auto& [name, value] : chain.parameters)
        if (!has(name) && nameable(name))
            constants_.emplace_back(name, value);
}

bool StateTable::has(const std::string& name) const {
    return std::find(names_.begin(), names_.end(), name) != names_.end();
}

const std::vector<double>& StateTable::column(const std::string& name) const {
    const auto it = std::find(names_.begin(), names_.end(), name);
    if (it == names_.end())
        throw UsageError(fmt::format("unknown state variable or measure '{}' (known: {})", name,
                                     fmt::join(names_, ", ")));
    return columns_[static_cast<std::size_t>(it - names_.begin())];
}

bool StateTable::integral(const std::string& name) const {
    column(name); // throws on an unknown name
    const auto it = std::find(names_.begin(), names_.end(), name);
    return integral_[static_cast<std::size_t>(it - names_.begin())];
}

std::vector<double> StateTable::evaluate(const std::string& expression,
                                         const std::string& role) const {
    // One slot per column; the compiled expression reads them on every evaluation.
    std::vector<double> slots(names_.size(), 0.0);
    model::Scope scope;
    scope.constants = constants_;
    for (std::size_t c = 0; c < names_.size(); ++c)
        if (nameable(names_[c]))
            scope.variables.emplace_back(names_[c], &slots[c]);

    std::vector<double> out(rows_);
    try {
        const model::Expression compiled(model::Text{expression, {}}, scope, role);
        for (std::size_t r = 0; r < rows_; ++r) {
            for (std::size_t c = 0; c < slots.size(); ++c)
                slots[c] = columns_[c][r];
            out[r] = compiled();
        }
    } catch (const InputError& e) {
        std::vector<std::string> known;
        for (const auto& [name, slot] : scope.variables)
            known.push_back(name);
        for (const auto& [name, value] : scope.constants)
            known.push_back(name);
        throw expression_usage_error(e, known, "names available");
    }
    return out;
}

void StateTable::add(const std::string& name, std::vector<double> values, bool integral) {
    if (has(name))
        throw UsageError(fmt::format("'{}' already names a state variable or measure", name));
    if (values.size() != rows_)
        throw std::logic_error("StateTable::add: one value per row expected");
    names_.push_back(name);
    columns_.push_back(std::move(values));
    integral_.push_back(integral);
    // A parameter of the same name would now be ambiguous in expressions.
    std::erase_if(constants_, [&](const auto& c) { return c.first == name; });
}

} // namespace longrun::summary

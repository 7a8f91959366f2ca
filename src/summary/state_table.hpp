// The per-state quantities a summary can talk about, for this rank's rows:
// state variables, the chain's measures, the model's parameters as constants,
// and expressions over all of them (muparser, compiled once, evaluated per row).
#pragma once

#include "io/chain.hpp"

#include <string>
#include <utility>
#include <vector>

namespace longrun::summary {

class StateTable {
  public:
    // Names: the chain's state variables, then its measures; constants: the
    // chain's model parameters (absent for chains not made by `generate`).
    explicit StateTable(const io::Chain& chain);

    std::size_t rows() const noexcept { return rows_; }
    bool has(const std::string& name) const;
    const std::vector<double>& column(const std::string& name) const; // throws UsageError
    bool integral(const std::string& name) const;
    const std::vector<std::string>& names() const noexcept { return names_; }

    // Evaluates `expression` on every row. Throws UsageError (exit 1) naming
    // `role` (e.g. "--measure load=waiting+busy") and the unknown name or syntax
    // fault; the error is the same on every rank (it depends on names only).
    std::vector<double> evaluate(const std::string& expression, const std::string& role) const;

    // Adds a named column (a --measure) that later expressions may use.
    void add(const std::string& name, std::vector<double> values, bool integral);

  private:
    std::size_t rows_ = 0;
    std::vector<std::string> names_;
    std::vector<std::vector<double>> columns_;
    std::vector<bool> integral_;
    std::vector<std::pair<std::string, double>> constants_;
};

} // namespace longrun::summary

// Expressions of a model (guards, rates, updates, bounds, measures), compiled
// once with muparser and then evaluated millions of times. Parameters become
// constants so that muparser folds them into the byte code; variables are read
// from double slots that the explorer fills before each evaluation.
#pragma once

#include "model.hpp"

#include <memory>
#include <string>
#include <utility>
#include <vector>

namespace mu {
class Parser;
}

namespace longrun::model {

struct Scope {
    std::vector<std::pair<std::string, double>> constants;
    std::vector<std::pair<std::string, double*>> variables; // slots outlive the expressions
};

// Names an expression may not take: muparser's functions and our additions.
bool is_reserved_name(const std::string& name);
bool is_identifier(const std::string& name);

class Expression {
  public:
    // `role` says what the expression is for in messages ("rate of event 'arrive'").
    // Throws InputError naming the file and line on a syntax error or an unknown name.
    Expression(const Text& text, const Scope& scope, std::string role);
    Expression(Expression&&) noexcept;
    Expression& operator=(Expression&&) noexcept;
    ~Expression();

    double operator()() const;
    const Text& text() const noexcept { return text_; }
    const std::string& role() const noexcept { return role_; }

  private:
    std::unique_ptr<mu::Parser> parser_;
    Text text_;
    std::string role_;
};

// Evaluates a text that may only use the given constants (bounds, start values,
// parameters defined from earlier ones).
double evaluate_constant(const Text& text, const Scope& scope, const std::string& role);

} // namespace longrun::model

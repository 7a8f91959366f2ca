#include "expression.hpp"

#include "io/error.hpp"

#include <fmt/format.h>
#include <muParser.h>

#include <algorithm>
#include <array>
#include <cctype>
#include <cmath>

namespace longrun::model {

namespace {

// muparser has no modulo, negation or rounding down; models need all three
// (phases that wrap around, "not full", halving a batch).
double modulo(double a, double b) {
    return std::fmod(a, b);
}
double logical_not(double a) {
    return a == 0 ? 1.0 : 0.0;
}
double round_down(double a) {
    return std::floor(a);
}
double round_up(double a) {
    return std::ceil(a);
}

constexpr std::array reserved{"sin",  "cos",   "tan",   "asin",  "acos", "atan",  "sinh", "cosh",
                              "tanh", "asinh", "acosh", "atanh", "log2", "log10", "log",  "ln",
                              "exp",  "sqrt",  "sign",  "rint",  "abs",  "min",   "max",  "sum",
                              "avg",  "floor", "ceil",  "_pi",   "_e",   "true",  "false"};

std::string explain(const mu::Parser::exception_type& e, const std::string& expression) {
    const std::string token = e.GetToken();
    std::string trimmed = token;
    while (!trimmed.empty() && std::isspace(static_cast<unsigned char>(trimmed.back())))
        trimmed.pop_back();
    if (e.GetCode() == mu::ecUNASSIGNABLE_TOKEN && is_identifier(trimmed))
        return fmt::format("unknown name '{}' in \"{}\" (not a variable or parameter of the model)",
                           trimmed, expression);
    std::string message = e.GetMsg();
    if (!message.empty() && message.back() == '.')
        message.pop_back();
    return fmt::format("{} in \"{}\"", message, expression);
}

} // namespace

bool is_identifier(const std::string& name) {
    if (name.empty() || !(std::isalpha(static_cast<unsigned char>(name[0])) || name[0] == '_'))
        return false;
    return std::all_of(name.begin(), name.end(), [](char c) {
        return std::isalnum(static_cast<unsigned char>(c)) || c == '_';
    });
}

bool is_reserved_name(const std::string& name) {
    return std::find(reserved.begin(), reserved.end(), name) != reserved.end();
}

Expression::Expression(const Text& text, const Scope& scope, std::string role)
    : parser_(std::make_unique<mu::Parser>()), text_(text), role_(std::move(role)) {
    try {
        auto& p = *parser_;
        p.DefineOprt("%", modulo, mu::prMUL_DIV, mu::oaLEFT, true);
        p.DefineInfixOprt("!", logical_not);
        p.DefineFun("floor", round_down);
        p.DefineFun("ceil", round_up);
        p.DefineConst("true", 1.0);
        p.DefineConst("false", 0.0);
        for (const auto& [name, value] : scope.constants)
            p.DefineConst(name, value);
        for (const auto& [name, slot] : scope.variables)
            p.DefineVar(name, slot);
        if (text.expression.find_first_not_of(" \t") == std::string::npos)
            throw InputError(fmt::format("{}{}: empty expression", text.where.prefix(), role_));
        p.SetExpr(text.expression);
        // muparser compiles on first use; doing it now reports every syntax error
        // and unknown name before exploration starts, not in some far-off state.
        p.Eval();
    } catch (const mu::Parser::exception_type& e) {
        throw InputError(
            fmt::format("{}{}: {}", text.where.prefix(), role_, explain(e, text.expression)));
    }
}

Expression::Expression(Expression&&) noexcept = default;
Expression& Expression::operator=(Expression&&) noexcept = default;
Expression::~Expression() = default;

double Expression::operator()() const {
    try {
        return parser_->Eval();
    } catch (const mu::Parser::exception_type& e) {
        throw InputError(
            fmt::format("{}{}: {}", text_.where.prefix(), role_, explain(e, text_.expression)));
    }
}

double evaluate_constant(const Text& text, const Scope& scope, const std::string& role) {
    Scope constants_only{scope.constants, {}};
    const double v = Expression(text, constants_only, role)();
    if (!std::isfinite(v))
        throw InputError(fmt::format("{}{}: \"{}\" is {}", text.where.prefix(), role,
                                     text.expression, std::isnan(v) ? "not a number" : "infinite"));
    return v;
}

} // namespace longrun::model

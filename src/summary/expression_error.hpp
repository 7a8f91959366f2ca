// An expression given on the command line that does not compile is a usage
// error (exit 1), not a bad input file: the message names the option it came
// from and the names it could have used.
#pragma once

#include "io/error.hpp"

#include <fmt/format.h>
#include <fmt/ranges.h>

#include <string>
#include <vector>

namespace longrun::summary {

// `error` comes from model::Expression, which prefixes "<file>:<line>: " for
// model files; here there is no file and the role alone says where the text came from.
inline UsageError expression_usage_error(const InputError& error,
                                         const std::vector<std::string>& known,
                                         const std::string& what_known) {
    std::string message = error.what();
    if (message.rfind(": ", 0) == 0)
        message.erase(0, 2);
    return UsageError(
        fmt::format("{}; {}: {}", message, what_known,
                    known.empty() ? "none" : fmt::format("{}", fmt::join(known, ", "))));
}

} // namespace longrun::summary

#pragma once

#include <fmt/format.h>

#include <string>

namespace longrun {

// Numbers in messages: enough digits to tell 0.966667 from 1, no noise digits.
inline std::string fmt_double(double x) {
    return fmt::format("{:.10g}", x);
}

} // namespace longrun

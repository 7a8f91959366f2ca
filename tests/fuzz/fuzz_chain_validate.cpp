// The bytes describe one rank's slice of a chain as the file reader hands it to
// io::validate_slice: a row pointer that is already known to be sound (the
// reader checks it first), and targets, weights, event labels, event names and
// a state variable that are anything at all. Validation must never crash and
// must never accept what breaks the promises in chain_invariants.hpp.
//
// Layout: a flags byte, then sizes, then per row a length and its entries; a
// byte picks each weight either from a table of awkward values or from the
// next eight raw bytes. Running out of bytes reads zeros.
#include "chain_invariants.hpp"

#include "io/chain_file.hpp"

#include <algorithm>
#include <cstddef>
#include <cstdint>
#include <cstring>
#include <limits>
#include <string>

namespace {

class Bytes {
  public:
    Bytes(const std::uint8_t* data, std::size_t size) : data_(data), size_(size) {}

    template <class T>
    T take() {
        T value{};
        const std::size_t n = std::min(sizeof(T), size_ - at_);
        std::memcpy(&value, data_ + at_, n);
        at_ += n;
        return value;
    }

  private:
    const std::uint8_t* data_;
    std::size_t size_;
    std::size_t at_ = 0;
};

constexpr double awkward[] = {
    0.0,
    -0.0,
    1.0,
    0.5,
    0.25,
    1.0 / 3,
    2.0 / 3,
    0.1,
    1 - 1e-9,
    1 + 1e-9,
    -1.0,
    1e-300,
    1e-310, // subnormal
    std::numeric_limits<double>::denorm_min(),
    std::numeric_limits<double>::min(),
    1e308,
    std::numeric_limits<double>::max(),
    std::numeric_limits<double>::infinity(),
    -std::numeric_limits<double>::infinity(),
    std::numeric_limits<double>::quiet_NaN(),
};
constexpr std::size_t awkward_count = sizeof awkward / sizeof awkward[0];

double number(Bytes& in) {
    const auto pick = in.take<std::uint8_t>();
    return pick < 192 ? awkward[pick % awkward_count] : in.take<double>();
}

constexpr double tolerances[] = {1e-8, 1e-15, 0.5, 1e-300};

} // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
    using namespace longrun::io;
    Bytes in(data, size);
    const auto flags = in.take<std::uint8_t>();
    Chain c;
    c.kind = flags & 1 ? ChainKind::dtmc : ChainKind::ctmc;
    ValidationOptions options;
    options.renormalize = flags & 2;
    options.row_sum_tolerance = tolerances[(flags >> 2) & 3];
    const bool with_events = flags & 16;
    const bool with_variable = flags & 32;
    const bool raw_targets = flags & 64;

    c.states = 1 + in.take<std::uint8_t>() % 32;
    c.rows.begin = in.take<std::uint8_t>() % c.states;
    c.rows.end = c.rows.begin + in.take<std::uint8_t>() % (c.states - c.rows.begin + 1);
    const unsigned names = in.take<std::uint8_t>() % 4u;
    for (unsigned i = 0; i < names; ++i)
        c.event_names.push_back("e" + std::to_string(i));

    c.offsets.assign(1, 0);
    for (std::uint64_t r = c.rows.begin; r < c.rows.end; ++r) {
        const unsigned length = in.take<std::uint8_t>() % 9u;
        for (unsigned k = 0; k < length; ++k) {
            c.targets.push_back(raw_targets ? in.take<std::uint64_t>()
                                            : in.take<std::uint8_t>() % (c.states + 2));
            c.weights.push_back(number(in));
            if (with_events)
                c.events.push_back(in.take<std::uint8_t>() % (names + 2));
        }
        c.offsets.push_back(c.targets.size());
    }
    c.transitions = c.targets.size();
    if (with_variable) {
        StateVariable v;
        v.name = "x";
        for (std::uint64_t r = c.rows.begin; r < c.rows.end; ++r)
            v.values.push_back(number(in));
        c.variables.push_back(std::move(v));
    }

    ValidationReport report;
    if (!validate_slice(c, "fuzz.h5", options, report))
        longrun::fuzz::check_accepted(c);
    return 0;
}

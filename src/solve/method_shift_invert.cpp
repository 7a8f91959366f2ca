// `shift-invert`: placeholder until the method lands.
#include "method.hpp"

namespace longrun::solve {

Attempt run_shift_invert(const TransposedChain&, Vec, const MethodSettings&) {
    throw MethodDeclined("method 'shift-invert' is not built yet");
}

} // namespace longrun::solve

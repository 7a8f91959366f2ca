// `power`: placeholder until the method lands.
#include "method.hpp"

namespace longrun::solve {

Attempt run_power(const TransposedChain&, Vec, const MethodSettings&) {
    throw MethodDeclined("method 'power' is not built yet");
}

} // namespace longrun::solve

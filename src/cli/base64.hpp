// Base64 (RFC 4648, section 4, with padding): how the HTML report carries its
// pictures inside itself as data: URIs.
#pragma once

#include <string>
#include <string_view>

namespace longrun::cli {

std::string base64_encode(std::string_view bytes);

} // namespace longrun::cli

// SHA-256 digests (OpenSSL libcrypto) for content-addressed designs.
#pragma once

#include <string>
#include <string_view>

namespace ampbench::store {

// Lowercase hexadecimal SHA-256 of `bytes`.
std::string sha256_hex(std::string_view bytes);

}  // namespace ampbench::store

// The canonical form of a JSON text (object keys sorted, no whitespace, numbers as parsed) and
// the content address built on it.
#pragma once

#include <string>
#include <string_view>

namespace ampbench::store {

// InputError naming `origin` (and line/column) when `text` is not JSON.
std::string canonical_json(std::string_view text, const std::string& origin);

// SHA-256 (hex) of the canonical form: the same design written with its keys in another order or
// other spacing gets the same address.
std::string content_address(std::string_view json_text, const std::string& origin);

}  // namespace ampbench::store

// Canonical JSON via nlohmann::json, whose objects are std::map-ordered (bytewise key order,
// which for UTF-8 is code-point order) and whose dump() without indent has no whitespace.
#include "store/canonical_json.h"

#include <nlohmann/json.hpp>

#include "core/json_read.h"
#include "store/sha256.h"

namespace ampbench::store {

std::string canonical_json(std::string_view text, const std::string& origin) {
    const JsonDocument doc = JsonDocument::parse(text, origin);
    // Invalid UTF-8 inside strings is kept byte for byte rather than refused or altered.
    return doc.root().dump(-1, ' ', false, nlohmann::json::error_handler_t::ignore);
}

std::string content_address(std::string_view json_text, const std::string& origin) {
    return sha256_hex(canonical_json(json_text, origin));
}

}  // namespace ampbench::store

// IEEE 488.2 arbitrary block data (§7.7.6 definite length `#<n><len><data>`, §7.7.6.2 indefinite
// `#0<data>` ending at the message terminator): header parsing, encoding and whole-text decoding.
#pragma once

#include <cstddef>
#include <optional>
#include <string>
#include <string_view>

namespace ampbench::drivers {

constexpr size_t kDefaultMaxBlockBytes = 64u << 20;

struct BlockHeader {
    bool indefinite = false;
    size_t header_bytes = 0;  // '#', the digit count and the length digits
    size_t length = 0;        // data bytes (definite form)
};

// Parses a header at the start of `text`. Returns nullopt when more bytes are needed; throws
// std::invalid_argument with the reason for a malformed header or a length above max_bytes
// (checked before anything is allocated).
std::optional<BlockHeader> parse_block_header(std::string_view text, size_t max_bytes = kDefaultMaxBlockBytes);

// `#<n><len><data>`.
std::string encode_block(std::string_view data);

// Decodes one complete block reply (an optional "\n" or "\r\n" after a definite block; the
// indefinite form runs to a final "\n"). Throws std::invalid_argument for anything else.
std::string decode_block(std::string_view text, size_t max_bytes = kDefaultMaxBlockBytes);

}  // namespace ampbench::drivers

// Fuzzes the IEEE 488.2 block parser: no input may crash, hang or allocate past the cap, and
// whatever decodes must re-encode to a block that decodes to the same bytes.
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <stdexcept>
#include <string_view>

#include "drivers/scpi/block.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
    const std::string_view text(reinterpret_cast<const char*>(data), size);
    constexpr size_t kCap = 1 << 16;
    try {
        if (auto h = ampbench::drivers::parse_block_header(text, kCap); h && !h->indefinite && h->length > kCap)
            std::abort();
        const std::string decoded = ampbench::drivers::decode_block(text, kCap);
        if (ampbench::drivers::decode_block(ampbench::drivers::encode_block(decoded), kCap) != decoded) std::abort();
    } catch (const std::invalid_argument&) {
    }
    return 0;
}

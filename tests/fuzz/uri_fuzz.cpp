// Fuzzes the instrument address parser: any text parses or throws InputError, and a parsed
// tcp address always has a host and a port in 1..65535.
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <string_view>

#include "core/errors.h"
#include "drivers/uri.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
    const std::string_view text(reinterpret_cast<const char*>(data), size);
    try {
        const auto uri = ampbench::drivers::parse_uri(text, "fuzz");
        if (uri.scheme == "tcp" && (uri.host.empty() || uri.port == 0)) std::abort();
    } catch (const ampbench::InputError&) {
    }
    return 0;
}

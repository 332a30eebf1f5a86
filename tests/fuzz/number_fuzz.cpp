// Fuzzes number parsing: SCPI numeric replies, booleans, number lists and the value syntax of
// input files (core parse_value), which must either parse or throw InputError.
#include <cstddef>
#include <cstdint>
#include <string_view>

#include "core/errors.h"
#include "core/value.h"
#include "drivers/scpi/parse.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
    const std::string_view text(reinterpret_cast<const char*>(data), size);
    (void)ampbench::drivers::parse_scpi_number(text);
    (void)ampbench::drivers::parse_scpi_bool(text);
    (void)ampbench::drivers::parse_number_list(text);
    try {
        (void)ampbench::parse_value(text, "fuzz");
    } catch (const ampbench::InputError&) {
    }
    try {
        (void)ampbench::parse_tolerance(text, "fuzz");
    } catch (const ampbench::InputError&) {
    }
    return 0;
}

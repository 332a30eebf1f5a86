// Fuzzes the *IDN? parser and the error-entry parser: any bytes give a result or nullopt.
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <string_view>

#include "drivers/scpi/parse.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
    const std::string_view text(reinterpret_cast<const char*>(data), size);
    if (auto id = ampbench::drivers::parse_identity(text)) {
        if (id->manufacturer.empty() || id->model.empty()) std::abort();
        if (id->manufacturer.find(',') != std::string::npos) std::abort();
    }
    if (auto e = ampbench::drivers::parse_error_entry(text)) (void)ampbench::drivers::scpi_error_class(e->code);
    (void)ampbench::drivers::scpi_token_matches(text, "SINusoid");
    return 0;
}

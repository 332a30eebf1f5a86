// Instrument addresses of DESIGN.md §4.3: tcp://host[:port], serial:///dev/tty...?baud=...,
// serial://usb-serial=ABC123?baud=..., usbtmc:///dev/usbtmcN and sim://?seed=7&fault=...
#pragma once

#include <cstdint>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

namespace ampbench::drivers {

struct InstrumentUri {
    std::string text;    // as written
    std::string scheme;  // "tcp", "serial", "usbtmc", "sim"
    std::string host;    // tcp
    uint16_t port = 0;   // tcp (5025 when not given)
    std::string path;    // serial / usbtmc device path
    std::string usb_serial;  // serial://usb-serial=...
    std::vector<std::pair<std::string, std::string>> query;  // in order, repeats kept

    // The value of a query key, or `fallback`.
    std::string param(std::string_view key, std::string fallback = {}) const;
};

// Throws InputError (field = `field`) naming the text and what is wrong.
InstrumentUri parse_uri(std::string_view text, std::string_view field = "uri");

struct SerialSettings {
    unsigned baud = 9600;
    unsigned data_bits = 8;
    std::string parity = "none";  // none, even, odd
    std::string stop_bits = "1";  // 1, 1.5, 2
    std::string flow = "none";    // none, hardware, software
};

// Reads and checks baud/parity/data/stop/flow from a serial URI; InputError on a bad value or an
// unknown key.
SerialSettings serial_settings(const InstrumentUri& uri, std::string_view field = "uri");

}  // namespace ampbench::drivers

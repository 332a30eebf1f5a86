// A strict hand-written URI scanner: anything unexpected is an InputError naming the text.
#include "drivers/uri.h"

#include <charconv>

#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench::drivers {
namespace {

[[noreturn]] void fail(std::string_view field, std::string_view text, std::string_view why) {
    throw InputError("", std::string(field), fmt::format("'{}' is not an instrument address ({})", text, why));
}

bool parse_unsigned(std::string_view s, unsigned long& out) {
    if (s.empty() || s.size() > 9) return false;
    for (char c : s)
        if (c < '0' || c > '9') return false;
    auto [p, ec] = std::from_chars(s.data(), s.data() + s.size(), out);
    return ec == std::errc() && p == s.data() + s.size();
}

bool printable(std::string_view s) {
    for (unsigned char c : s)
        if (c < 0x21 || c == 0x7f) return false;
    return true;
}

}  // namespace

std::string InstrumentUri::param(std::string_view key, std::string fallback) const {
    for (const auto& [k, v] : query)
        if (k == key) return v;
    return fallback;
}

InstrumentUri parse_uri(std::string_view text, std::string_view field) {
    InstrumentUri uri;
    uri.text = std::string(text);
    if (!printable(text)) fail(field, text, "empty, or contains spaces or control characters");
    const auto sep = text.find("://");
    if (sep == std::string_view::npos) fail(field, text, "no scheme; expected tcp://, serial://, usbtmc:// or sim://");
    uri.scheme = std::string(text.substr(0, sep));
    std::string_view rest = text.substr(sep + 3);
    std::string_view query;
    if (const auto q = rest.find('?'); q != std::string_view::npos) {
        query = rest.substr(q + 1);
        rest = rest.substr(0, q);
    }
    while (!query.empty()) {
        const auto amp = query.find('&');
        const std::string_view item = query.substr(0, amp);
        const auto eq = item.find('=');
        if (eq == std::string_view::npos || eq == 0) fail(field, text, fmt::format("query item '{}' is not key=value", item));
        uri.query.emplace_back(std::string(item.substr(0, eq)), std::string(item.substr(eq + 1)));
        if (amp == std::string_view::npos) break;
        query = query.substr(amp + 1);
        if (query.empty()) fail(field, text, "empty query item");
    }

    if (uri.scheme == "tcp") {
        std::string_view host = rest;
        uri.port = 5025;
        if (!host.empty() && host.back() == '/') host.remove_suffix(1);
        std::string_view port_text;
        if (!host.empty() && host.front() == '[') {  // [IPv6]:port
            const auto close = host.find(']');
            if (close == std::string_view::npos) fail(field, text, "unclosed '['");
            if (close + 1 < host.size()) {
                if (host[close + 1] != ':') fail(field, text, "expected ':' after ']'");
                port_text = host.substr(close + 2);
                if (port_text.empty()) fail(field, text, "empty port");
            }
            host = host.substr(1, close - 1);
        } else if (const auto colon = host.find(':'); colon != std::string_view::npos) {
            port_text = host.substr(colon + 1);
            if (port_text.empty()) fail(field, text, "empty port");
            host = host.substr(0, colon);
        }
        if (host.empty()) fail(field, text, "no host");
        if (host.find('/') != std::string_view::npos) fail(field, text, "a tcp address has no path");
        if (!port_text.empty()) {
            unsigned long port = 0;
            if (!parse_unsigned(port_text, port) || port == 0 || port > 65535)
                fail(field, text, fmt::format("port '{}' is not 1..65535", port_text));
            uri.port = static_cast<uint16_t>(port);
        }
        uri.host = std::string(host);
        if (!uri.query.empty()) fail(field, text, "a tcp address takes no query");
    } else if (uri.scheme == "serial") {
        constexpr std::string_view kUsb = "usb-serial=";
        if (rest.substr(0, kUsb.size()) == kUsb) {
            uri.usb_serial = std::string(rest.substr(kUsb.size()));
            if (uri.usb_serial.empty()) fail(field, text, "empty usb-serial");
        } else {
            if (rest.empty() || rest.front() != '/') fail(field, text, "expected serial:///dev/... or serial://usb-serial=...");
            uri.path = std::string(rest);
        }
        serial_settings(uri, field);
    } else if (uri.scheme == "usbtmc") {
        if (rest.empty() || rest.front() != '/') fail(field, text, "expected usbtmc:///dev/usbtmcN");
        uri.path = std::string(rest);
        if (!uri.query.empty()) fail(field, text, "a usbtmc address takes no query");
    } else if (uri.scheme == "sim") {
        if (!rest.empty() && rest != "/") fail(field, text, "a sim address has only a query (sim://?seed=7)");
    } else {
        fail(field, text, fmt::format("unknown scheme '{}'", uri.scheme));
    }
    return uri;
}

SerialSettings serial_settings(const InstrumentUri& uri, std::string_view field) {
    SerialSettings s;
    for (const auto& [key, value] : uri.query) {
        if (key == "baud") {
            unsigned long baud = 0;
            if (!parse_unsigned(value, baud) || baud < 50 || baud > 4000000)
                fail(field, uri.text, fmt::format("baud '{}' is not 50..4000000", value));
            s.baud = static_cast<unsigned>(baud);
        } else if (key == "data") {
            if (value != "5" && value != "6" && value != "7" && value != "8")
                fail(field, uri.text, fmt::format("data '{}' is not 5..8", value));
            s.data_bits = static_cast<unsigned>(value[0] - '0');
        } else if (key == "parity") {
            if (value != "none" && value != "even" && value != "odd")
                fail(field, uri.text, fmt::format("parity '{}' is not none, even or odd", value));
            s.parity = value;
        } else if (key == "stop") {
            if (value != "1" && value != "1.5" && value != "2")
                fail(field, uri.text, fmt::format("stop '{}' is not 1, 1.5 or 2", value));
            s.stop_bits = value;
        } else if (key == "flow") {
            if (value != "none" && value != "hardware" && value != "software")
                fail(field, uri.text, fmt::format("flow '{}' is not none, hardware or software", value));
            s.flow = value;
        } else {
            fail(field, uri.text, fmt::format("unknown serial setting '{}'", key));
        }
    }
    return s;
}

}  // namespace ampbench::drivers

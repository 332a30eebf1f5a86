// Instrument addresses (DESIGN.md §4.3).
#include <catch2/catch.hpp>

#include "core/errors.h"
#include "drivers/uri.h"

using namespace ampbench;
using namespace ampbench::drivers;

TEST_CASE("tcp addresses default to the raw SCPI port 5025", "[uri]") {
    // common practice: raw-socket SCPI instruments listen on TCP port 5025.
    auto u = parse_uri("tcp://192.0.2.10");
    CHECK(u.scheme == "tcp");
    CHECK(u.host == "192.0.2.10");
    CHECK(u.port == 5025);
    CHECK(parse_uri("tcp://bench-gen:5555").port == 5555);
    CHECK(parse_uri("tcp://[::1]:6000").host == "::1");
    CHECK(parse_uri("tcp://[::1]:6000").port == 6000);
}

TEST_CASE("serial, usbtmc and sim addresses", "[uri]") {
    auto s = parse_uri("serial:///dev/ttyUSB0?baud=115200&parity=none&data=8&stop=1&flow=none");
    CHECK(s.path == "/dev/ttyUSB0");
    CHECK(serial_settings(s).baud == 115200);
    auto u = parse_uri("serial://usb-serial=ABC123?baud=9600");
    CHECK(u.usb_serial == "ABC123");
    CHECK(parse_uri("usbtmc:///dev/usbtmc0").path == "/dev/usbtmc0");
    auto sim = parse_uri("sim://?seed=7&fault=C2:open&value=R3:3k3");
    CHECK(sim.param("seed") == "7");
    CHECK(sim.param("fault") == "C2:open");
}

TEST_CASE("bad addresses name the field and the text", "[uri]") {
    for (const char* bad : {"", "192.0.2.10", "tcp://", "tcp://host:0", "tcp://host:70000", "tcp://host:",
                            "tcp://host:12ab", "ftp://x", "serial://dev/tty", "serial:///dev/tty?baud=fast",
                            "serial:///dev/tty?speed=9600", "usbtmc://usbtmc0", "tcp://a b", "sim://x",
                            "sim://?seed", "tcp://[::1"}) {
        INFO(bad);
        CHECK_THROWS_AS(parse_uri(bad, "scope.uri"), InputError);
    }
    CHECK_THROWS_WITH(parse_uri("tcp://host:99999", "scope.uri"), Catch::Contains("scope.uri") && Catch::Contains("99999"));
}

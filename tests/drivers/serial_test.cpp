// Serial and USBTMC transports against a socat pseudo-terminal pair.
#include <chrono>

#include <catch2/catch.hpp>

#include "core/errors.h"
#include "drivers/scpi/session.h"
#include "drivers/transport/serial.h"
#include "drivers/transport/usbtmc.h"
#include "peer_support.h"

using namespace ampbench;
using namespace ampbench::drivers;
using ampbench::test::PeerAction;
using ampbench::test::PtyPair;

namespace {
SessionOptions options(double timeout_s) {
    SessionOptions o;
    o.instrument = "meter";
    o.timeout_s = timeout_s;
    return o;
}
}  // namespace

TEST_CASE("serial over a pseudo-terminal: chunked replies, blocks and a stall", "[pty]") {
    PtyPair pty;
    pty.serve([](const std::string& line) {
        if (line == "*IDN?") return PeerAction{"Harrow Vale Electronics,DM-6,MTR-01,3.0\r\n", 1};
        if (line == "READ?") return PeerAction{"+2.50000E+00\n", 3};
        if (line == "TRACe:DATA? (@1)") return PeerAction{encode_block("abcdefghij") + "\n", 4};
        return PeerAction{"", 0, false, true};
    });
    ScpiSession s(std::make_unique<SerialTransport>(pty.device_a(), SerialSettings{115200}), options(0.3));
    CHECK(s.identify().manufacturer == "Harrow Vale Electronics");
    CHECK(s.query_number("READ?") == 2.5);
    CHECK(s.query_block("TRACe:DATA? (@1)") == "abcdefghij");
    const auto t0 = std::chrono::steady_clock::now();
    CHECK_THROWS_AS(s.query("SILENT?"), TimeoutError);
    CHECK(std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count() < 1.3);
    CHECK(s.query_number("READ?") == 2.5);  // the session goes on after a timeout
}

TEST_CASE("a serial device that does not exist is a ConnectionError naming it", "[pty]") {
    CHECK_THROWS_WITH(SerialTransport("/dev/ampbench-no-such-tty", SerialSettings{}),
                      Catch::Contains("/dev/ampbench-no-such-tty"));
}

TEST_CASE("USBTMC message semantics over a pseudo-terminal standing in for the device", "[pty]") {
    PtyPair pty;
    pty.serve([](const std::string& line) {
        if (line == "*IDN?") return PeerAction{"Harrow Vale Electronics,SC-4,SCP-02,2.1\n"};
        // An indefinite block ends at the end of the message; it carries no terminator of its own.
        if (line == "TRACe:DATA? (@1)") return PeerAction{"#0\x01\x02\n\x03"};
        if (line == "TRACe:DATA? (@2)") return PeerAction{encode_block("xyz") + "\n"};
        return PeerAction{"", 0, false, true};
    });
    ScpiSession s(std::make_unique<UsbtmcTransport>(pty.device_a()), options(0.5));
    CHECK(s.transport().has_end_of_message());
    CHECK(s.identify().model == "SC-4");
    CHECK(s.query_block("TRACe:DATA? (@1)") == std::string("\x01\x02\n\x03"));
    CHECK(s.query_block("TRACe:DATA? (@2)") == "xyz");
    CHECK_THROWS_AS(s.query("SILENT?"), TimeoutError);
}

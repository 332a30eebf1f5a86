// SCPI session fault tests against a real loopback TCP server.
#include <chrono>
#include <memory>

#include <catch2/catch.hpp>

#include "core/errors.h"
#include "drivers/scpi/session.h"
#include "drivers/transport/tcp.h"
#include "peer_support.h"

using namespace ampbench;
using namespace ampbench::drivers;
using ampbench::test::PeerAction;
using ampbench::test::TcpPeer;

namespace {

std::unique_ptr<ScpiSession> connect(const TcpPeer& peer, double timeout_s = 2.0) {
    SessionOptions o;
    o.instrument = "scope";
    o.timeout_s = timeout_s;
    return std::make_unique<ScpiSession>(
        std::make_unique<TcpTransport>("127.0.0.1", peer.port(), deadline_after_s(2.0)), o);
}

double seconds_since(std::chrono::steady_clock::time_point t0) {
    return std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
}

}  // namespace

TEST_CASE("replies in 1-byte and odd-sized chunks parse", "[net]") {
    for (size_t chunk : {size_t{1}, size_t{3}, size_t{7}}) {
        TcpPeer peer([chunk](const std::string& line) {
            if (line == "*IDN?") return PeerAction{"Harrow Vale Electronics,SC-4,SCP-02,2.1\r\n", chunk};
            if (line == "VOLT?") return PeerAction{"+1.25000E-01\n", chunk};
            if (line == "DATA?") return PeerAction{encode_block("0123456789abcdefXYZ") + "\n", chunk};
            return PeerAction{};
        });
        auto s = connect(peer);
        CHECK(s->identify().model == "SC-4");
        CHECK(s->query_number("VOLT?") == Approx(0.125));
        CHECK(s->query_block("DATA?") == "0123456789abcdefXYZ");
    }
}

TEST_CASE("a stalled peer gives TimeoutError within the deadline plus a margin", "[net]") {
    TcpPeer peer([](const std::string&) { return PeerAction{"", 0, false, true}; });
    auto s = connect(peer, 0.3);
    const auto t0 = std::chrono::steady_clock::now();
    CHECK_THROWS_WITH(s->query("*IDN?"), Catch::Contains("no reply to '*IDN?' within 300 ms"));
    const double took = seconds_since(t0);
    CHECK(took >= 0.29);
    CHECK(took < 0.3 + 1.0);  // margin for a loaded CI machine; the point is "no hang"
    CHECK_THROWS_AS(s->query("*IDN?"), TimeoutError);
}

TEST_CASE("a peer that closes mid-reply gives ConnectionError", "[net]") {
    TcpPeer peer([](const std::string&) { return PeerAction{"Harrow Vale,SC", 0, true}; });
    auto s = connect(peer);
    CHECK_THROWS_AS(s->query("*IDN?"), ConnectionError);
}

TEST_CASE("a block header longer than the data, then a close, is an error not a hang", "[net]") {
    // Source: IEEE 488.2-1992 §7.7.6.2: the length field counts the data bytes that follow.
    TcpPeer peer([](const std::string&) { return PeerAction{"#41000only-twenty-bytes!", 0, true}; });
    auto s = connect(peer, 2.0);
    const auto t0 = std::chrono::steady_clock::now();
    CHECK_THROWS_AS(s->query_block("TRACe:DATA? (@1)"), ConnectionError);
    CHECK(seconds_since(t0) < 2.0);
}

TEST_CASE("a #9 header announcing gigabytes is refused without allocating", "[net]") {
    TcpPeer peer([](const std::string&) { return PeerAction{"#9999999999abc\n"}; });
    auto s = connect(peer);
    // The 64 MB default cap is checked on the header alone, so no 1 GB buffer is ever asked for.
    CHECK_THROWS_WITH(s->query_block("TRACe:DATA? (@1)"),
                      Catch::Contains("TRACe:DATA? (@1)") && Catch::Contains("above the limit"));
}

TEST_CASE("indefinite blocks over TCP read to the terminator", "[net]") {
    // Source: IEEE 488.2-1992 §7.7.6.3 indefinite length arbitrary block ("#0" ... NL^END).
    TcpPeer peer([](const std::string&) { return PeerAction{"#0raw bytes here\n", 5}; });
    auto s = connect(peer);
    CHECK(s->query_block("TRACe:DATA? (@1)") == "raw bytes here");
}

TEST_CASE("a 10 MB block arrives intact over loopback", "[net]") {
    std::string data(10 << 20, '\0');
    for (size_t i = 0; i < data.size(); ++i) data[i] = static_cast<char>((i * 7919) >> 3);
    TcpPeer peer([&data](const std::string&) { return PeerAction{encode_block(data) + "\n"}; });
    auto s = connect(peer, 20.0);
    CHECK(s->query_block("TRACe:DATA? (@1)") == data);
}

TEST_CASE("non-numeric text where a number is expected names the command and reply", "[net]") {
    TcpPeer peer([](const std::string&) { return PeerAction{"OVERLOAD\n"}; });
    auto s = connect(peer);
    try {
        s->query_number("MEASure:VOLTage:PTPeak? (@2)");
        FAIL("no error");
    } catch (const InstrumentError& e) {
        CHECK(e.command() == "MEASure:VOLTage:PTPeak? (@2)");
        CHECK(e.reply() == "OVERLOAD");
        CHECK_THAT(e.what(), Catch::Contains("scope") && Catch::Contains("expected a number"));
    }
}

TEST_CASE("a non-empty error queue after a command raises with code and message", "[net]") {
    int errors_left = 2;
    TcpPeer peer([&errors_left](const std::string& line) {
        if (line == "SYSTem:ERRor?") {
            // Source: SCPI-1999 Vol. 2 §21.8.4: the queue is read oldest first until 0,"No error".
            if (errors_left == 2) return --errors_left, PeerAction{"-113,\"Undefined header\"\n"};
            if (errors_left == 1) return --errors_left, PeerAction{"-222,\"Data out of range\"\n"};
            return PeerAction{"0,\"No error\"\n"};
        }
        return PeerAction{};
    });
    auto s = connect(peer);
    s->write("INPut1:COUPLE DC");
    try {
        s->check_errors("INPut1:COUPLE DC");
        FAIL("no error");
    } catch (const InstrumentError& e) {
        CHECK(e.command() == "INPut1:COUPLE DC");
        CHECK_THAT(e.what(), Catch::Contains("command error -113 \"Undefined header\"") &&
                                 Catch::Contains("execution error -222 \"Data out of range\""));
    }
    CHECK(s->drain_errors().empty());
}

TEST_CASE("an error queue that never empties is bounded", "[net]") {
    TcpPeer peer([](const std::string&) { return PeerAction{"-350,\"Queue overflow\"\n"}; });
    auto s = connect(peer);
    CHECK_THROWS_WITH(s->drain_errors(), Catch::Contains("not empty after 32 reads"));
}

TEST_CASE("a dropped TCP connection can be reopened and the session continues", "[net]") {
    int calls = 0;
    TcpPeer peer([&calls](const std::string& line) {
        ++calls;
        if (line == "DROP?") return PeerAction{"", 0, true};
        return PeerAction{"Harrow Vale Electronics,SG-10,GEN-07,1.0\n"};
    });
    auto s = connect(peer);
    CHECK(s->identify().serial == "GEN-07");
    CHECK_THROWS_AS(s->query("DROP?"), ConnectionError);
    s->reconnect();
    CHECK(s->identify().serial == "GEN-07");
}

TEST_CASE("a closed port is a clear ConnectionError", "[net]") {
    uint16_t port = 0;
    {
        TcpPeer peer([](const std::string&) { return PeerAction{}; });
        port = peer.port();
    }
    CHECK_THROWS_WITH(TcpTransport("127.0.0.1", port, deadline_after_s(2.0)), Catch::Contains("connection refused"));
}

// --trace logging of every exchange.
#include <fstream>
#include <sstream>

#include <catch2/catch.hpp>

#include "drivers/scpi/session.h"
#include "drivers/transport/tcp.h"
#include "drivers/transport/trace.h"
#include "peer_support.h"

using namespace ampbench::drivers;
using ampbench::test::PeerAction;
using ampbench::test::TcpPeer;

TEST_CASE("escape_bytes shows control bytes", "[trace]") {
    CHECK(escape_bytes("*IDN?\n") == "*IDN?\\n");
    CHECK(escape_bytes(std::string("#12\x00\xff\r", 6)) == "#12\\x00\\xFF\\r");
    CHECK(escape_bytes("a\\b") == "a\\\\b");
}

TEST_CASE("a traced session logs time, instrument, direction and bytes", "[net]") {
    TcpPeer peer([](const std::string&) { return PeerAction{"Harrow Vale Electronics,SG-10,GEN-07,1.0\r\n"}; });
    const std::string path = ampbench::test::write_temp_file("trace.log", "");
    {
        auto log = std::make_shared<TraceLog>(path);
        auto tcp = std::make_unique<TcpTransport>("127.0.0.1", peer.port(), deadline_after_s(2.0));
        SessionOptions o;
        o.instrument = "generator";
        ScpiSession s(std::make_unique<TracingTransport>(std::move(tcp), "generator", log), o);
        s.identify();
    }
    std::ifstream in(path);
    std::string line1, line2;
    std::getline(in, line1);
    std::getline(in, line2);
    CHECK_THAT(line1, Catch::Matches(R"(\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d{6}Z generator -> \*IDN\?\\n)"));
    CHECK_THAT(line2, Catch::EndsWith("generator <- Harrow Vale Electronics,SG-10,GEN-07,1.0\\r\\n"));
}

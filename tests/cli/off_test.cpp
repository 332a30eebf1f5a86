// `ampbench off` against scripted peers that record what they are sent.
#include <sstream>

#include <catch2/catch.hpp>

#include "cli/app.h"
#include "drivers/peer_support.h"

using namespace ampbench::test;

TEST_CASE("off switches the generator off before the supply, whatever their state", "[net]") {
    auto log = std::make_shared<std::vector<std::string>>();
    auto mutex = std::make_shared<std::mutex>();
    auto gen = std::make_shared<ModelInstrument>("generator", log, mutex);
    auto sup = std::make_shared<ModelInstrument>("supply", log, mutex);
    gen->set("OUTPut1:STATe", "ON");
    sup->set("OUTPut:STATe", "ON");
    TcpPeer gen_peer([gen](const std::string& l) { return (*gen)(l); });
    TcpPeer sup_peer([sup](const std::string& l) { return (*sup)(l); });
    const std::string bench = write_temp_file(
        "off.bench.json", R"({"format":"ampbench-bench/1","supply":{"uri":")" + sup_peer.uri() +
                              R"("},"generator":{"uri":")" + gen_peer.uri() + R"("}})");
    std::ostringstream out, err;
    const std::string trace = write_temp_file("off.trace", "");
    CHECK(ampbench::cli::run({"--trace", trace, "off", bench}, out, err) == 0);
    CHECK(out.str() == "generator output off\nsupply output off\n");
    std::lock_guard lock(*mutex);
    const auto g = std::find(log->begin(), log->end(), "generator: OUTPut1:STATe OFF");
    const auto s = std::find(log->begin(), log->end(), "supply: OUTPut:STATe OFF");
    REQUIRE(g != log->end());
    REQUIRE(s != log->end());
    CHECK(g < s);
    // The outputs really are off when read back.
    CHECK(std::find(log->begin(), log->end(), "supply: OUTPut:STATe?") != log->end());
}

TEST_CASE("off reports an instrument it cannot reach and exits 3", "[net]") {
    uint16_t closed_port = 0;
    { TcpPeer gone([](const std::string&) { return PeerAction{}; }); closed_port = gone.port(); }
    const std::string bench = write_temp_file(
        "off-dead.bench.json",
        R"({"format":"ampbench-bench/1","supply":{"uri":"tcp://127.0.0.1:)" + std::to_string(closed_port) + R"("}})");
    std::ostringstream out, err;
    CHECK(ampbench::cli::run({"off", bench}, out, err) == 3);
    CHECK_THAT(err.str(), Catch::Contains("supply") && Catch::Contains("connection refused"));
}

// `ampbench check` against a loopback SCPI server, a pseudo-terminal, a closed port and a
// silent peer, run in-process through cli::run.
#include <sstream>

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "cli/app.h"
#include "drivers/peer_support.h"

using namespace ampbench::test;

namespace {

struct Run {
    int code;
    std::string out, err;
};

Run run_cli(const std::vector<std::string>& args) {
    std::ostringstream out, err;
    const int code = ampbench::cli::run(args, out, err);
    return {code, out.str(), err.str()};
}

std::string bench_with(const std::string& role, const std::string& uri, const std::string& extra = "") {
    return R"({"format":"ampbench-bench/1",")" + role + R"(":{"uri":")" + uri + R"(","profile":"scpi-generic")" +
           extra + "}}";
}

}  // namespace

TEST_CASE("check reports identity, errors and round trip from a loopback SCPI server", "[net]") {
    auto log = std::make_shared<std::vector<std::string>>();
    auto mutex = std::make_shared<std::mutex>();
    auto model = std::make_shared<ModelInstrument>("scope", log, mutex);
    bool first_error = true;
    TcpPeer peer([model, &first_error](const std::string& l) {
        // Source: SCPI-1999 Vol. 2 §21.8: entries come oldest first, then 0,"No error".
        if (l == "SYSTem:ERRor?" && first_error) {
            first_error = false;
            return PeerAction{"-410,\"Query INTERRUPTED\"\n"};
        }
        return (*model)(l);
    });
    const std::string bench = write_temp_file("tcp.bench.json",
                                              bench_with("scope", peer.uri(), R"(,"cal_due":"2099-01-01")"));
    const Run r = run_cli({"check", bench, "--json"});
    INFO(r.err);
    CHECK(r.code == 0);
    const auto doc = nlohmann::json::parse(r.out);
    const auto& inst = doc.at("instruments").at(0);
    CHECK(inst.at("role") == "scope");
    CHECK(inst.at("uri") == peer.uri());
    CHECK(inst.at("ok") == true);
    CHECK(inst.at("idn").at("manufacturer") == "Harrow Vale Electronics");
    CHECK(inst.at("idn").at("serial") == "PA1-2611-0042");
    REQUIRE(inst.at("errors").size() == 1);
    CHECK_THAT(inst.at("errors").at(0).get<std::string>(), Catch::Contains("-410") && Catch::Contains("query error"));
    CHECK(inst.at("round_trip_ms").get<double>() > 0.0);
    CHECK(inst.at("problem").is_null());
    CHECK(inst.at("calibration").at("state") == "in date");
    // check sends *IDN? and drains the queue, nothing else.
    std::lock_guard lock(*mutex);
    for (const auto& cmd : commands_of(*log, "scope")) CHECK((cmd == "*IDN?" || cmd == "SYSTem:ERRor?"));
}

TEST_CASE("check works over a pseudo-terminal", "[pty]") {
    PtyPair pty;
    auto log = std::make_shared<std::vector<std::string>>();
    auto model = std::make_shared<ModelInstrument>("meter", log, std::make_shared<std::mutex>());
    pty.serve([model](const std::string& l) { return (*model)(l); });
    const std::string bench = write_temp_file("pty.bench.json", bench_with("meter", "serial://" + pty.device_a() + "?baud=115200"));
    const Run r = run_cli({"check", bench});
    INFO(r.err);
    CHECK(r.code == 0);
    CHECK_THAT(r.out, Catch::Contains("Harrow Vale Electronics Test Rig TR-1") && Catch::Contains("answers"));
}

TEST_CASE("check gives a clear problem for a closed port and a silent peer", "[net]") {
    uint16_t closed_port = 0;
    { TcpPeer gone([](const std::string&) { return PeerAction{}; }); closed_port = gone.port(); }
    TcpPeer silent([](const std::string&) { return PeerAction{"", 0, false, true}; });
    const std::string bench = write_temp_file(
        "faults.bench.json",
        R"({"format":"ampbench-bench/1","generator":{"uri":"tcp://127.0.0.1:)" + std::to_string(closed_port) +
            R"("},"supply":{"uri":")" + silent.uri() + R"("}})");
    const Run r = run_cli({"check", bench, "--json", "--timeout-ms", "300"});
    CHECK(r.code == 3);
    const auto doc = nlohmann::json::parse(r.out);
    const auto& gen = doc.at("instruments").at(0);
    const auto& sup = doc.at("instruments").at(1);
    CHECK(gen.at("ok") == false);
    CHECK_THAT(gen.at("problem").get<std::string>(), Catch::Contains("connection refused"));
    CHECK(sup.at("ok") == false);
    CHECK_THAT(sup.at("problem").get<std::string>(), Catch::Contains("no reply to '*IDN?' within 300 ms"));
    CHECK(sup.at("idn").is_null());
}

TEST_CASE("check names garbage identities and bad bench files", "[net]") {
    TcpPeer peer([](const std::string&) { return PeerAction{"\x01\x02 hello\n"}; });
    const std::string bench = write_temp_file("garbage.bench.json", bench_with("meter", peer.uri()));
    const Run r = run_cli({"check", bench, "--json", "--timeout-ms", "500"});
    CHECK(r.code == 3);
    CHECK_THAT(nlohmann::json::parse(r.out).at("instruments").at(0).at("problem").get<std::string>(),
               Catch::Contains("garbage identity"));
    const std::string bad = write_temp_file("bad.bench.json", bench_with("meter", "tcp://host:99999"));
    const Run b = run_cli({"check", bad});
    CHECK(b.code == 2);
    CHECK_THAT(b.err, Catch::Contains("bad.bench.json") && Catch::Contains("meter.uri"));
}

// Roles over the scpi-generic profile against scripted peers that record what they are sent.
#include <memory>
#include <mutex>

#include <catch2/catch.hpp>

#include "core/bench_file.h"
#include "core/errors.h"
#include "drivers/bench_instruments.h"
#include "drivers/transport/tcp.h"
#include "peer_support.h"

using namespace ampbench;
using namespace ampbench::drivers;
using namespace ampbench::test;

namespace {

struct Rig {
    std::shared_ptr<std::vector<std::string>> log = std::make_shared<std::vector<std::string>>();
    std::shared_ptr<std::mutex> mutex = std::make_shared<std::mutex>();
    std::vector<std::string> snapshot() {
        std::lock_guard lock(*mutex);
        return *log;
    }
};

std::unique_ptr<ScpiSession> session_to(const TcpPeer& peer, const std::string& role) {
    SessionOptions o = find_profile("scpi-generic", {}, "", "profile").session;
    o.instrument = role;
    o.timeout_s = 2.0;
    return std::make_unique<ScpiSession>(
        std::make_unique<TcpTransport>("127.0.0.1", peer.port(), deadline_after_s(2.0)), o);
}

Profile generic() { return find_profile("scpi-generic", {}, "", "profile"); }

}  // namespace

TEST_CASE("the supply refuses to switch on without a read-back current limit", "[net]") {
    Rig rig;
    auto model = std::make_shared<ModelInstrument>("supply", rig.log, rig.mutex);
    TcpPeer peer([model](const std::string& l) { return (*model)(l); });
    Supply supply(session_to(peer, "supply"), generic());
    supply.set_voltage(12.0);
    CHECK_THROWS_AS(supply.output_on(), SafetyStop);
    for (const auto& cmd : commands_of(rig.snapshot(), "supply")) CHECK(cmd.rfind("OUTPut", 0) != 0);

    CHECK(supply.set_current_limit(0.05) == Approx(0.05));
    supply.output_on();
    const auto cmds = commands_of(rig.snapshot(), "supply");
    const auto limit = std::find(cmds.begin(), cmds.end(), "SOURce:CURRent 0.05");
    const auto readback = std::find(cmds.begin(), cmds.end(), "SOURce:CURRent?");
    const auto on = std::find(cmds.begin(), cmds.end(), "OUTPut:STATe ON");
    REQUIRE(on != cmds.end());
    CHECK(limit < readback);
    CHECK(readback < on);
}

TEST_CASE("a limit that reads back looser than asked stops the supply", "[net]") {
    Rig rig;
    auto model = std::make_shared<ModelInstrument>("supply", rig.log, rig.mutex);
    model->overrides["SOURce:CURRent"] = "1.0";  // an instrument that ignored the limit
    TcpPeer peer([model](const std::string& l) { return (*model)(l); });
    Supply supply(session_to(peer, "supply"), generic());
    CHECK_THROWS_WITH(supply.set_current_limit(0.05), Catch::Contains("reads back 1 A"));
    CHECK_THROWS_AS(supply.output_on(), SafetyStop);
}

TEST_CASE("off switches the generator output off before the supply output", "[net]") {
    Rig rig;
    auto gen = std::make_shared<ModelInstrument>("generator", rig.log, rig.mutex);
    auto sup = std::make_shared<ModelInstrument>("supply", rig.log, rig.mutex);
    gen->set("OUTPut1:STATe", "ON");
    sup->set("OUTPut:STATe", "ON");
    TcpPeer gen_peer([gen](const std::string& l) { return (*gen)(l); });
    TcpPeer sup_peer([sup](const std::string& l) { return (*sup)(l); });
    BenchFile bench;
    bench.path = "bench.json";
    bench.generator.present = true;
    bench.generator.role = "generator";
    bench.generator.uri = gen_peer.uri();
    bench.supply.present = true;
    bench.supply.role = "supply";
    bench.supply.uri = sup_peer.uri();
    CHECK(switch_outputs_off(bench, {}).empty());
    const auto log = rig.snapshot();
    const auto gen_off = std::find(log.begin(), log.end(), "generator: OUTPut1:STATe OFF");
    const auto sup_off = std::find(log.begin(), log.end(), "supply: OUTPut:STATe OFF");
    REQUIRE(gen_off != log.end());
    REQUIRE(sup_off != log.end());
    CHECK(gen_off < sup_off);
}

TEST_CASE("off still switches the supply off when the generator does not answer", "[net]") {
    Rig rig;
    auto sup = std::make_shared<ModelInstrument>("supply", rig.log, rig.mutex);
    TcpPeer sup_peer([sup](const std::string& l) { return (*sup)(l); });
    uint16_t dead_port = 0;
    { TcpPeer gone([](const std::string&) { return PeerAction{}; }); dead_port = gone.port(); }
    BenchFile bench;
    bench.generator.present = true;
    bench.generator.role = "generator";
    bench.generator.uri = "tcp://127.0.0.1:" + std::to_string(dead_port);
    bench.supply.present = true;
    bench.supply.role = "supply";
    bench.supply.uri = sup_peer.uri();
    const auto problems = switch_outputs_off(bench, {});
    REQUIRE(problems.size() == 1);
    CHECK_THAT(problems[0], Catch::Contains("generator") && Catch::Contains("refused"));
    const auto cmds = commands_of(rig.snapshot(), "supply");
    CHECK(std::find(cmds.begin(), cmds.end(), "OUTPut:STATe OFF") != cmds.end());
}

TEST_CASE("generator settings are sent and read back", "[net]") {
    Rig rig;
    auto model = std::make_shared<ModelInstrument>("generator", rig.log, rig.mutex);
    model->overrides["OUTPut1:LOAD"] = "9.9E37";  // SCPI-1999: INFinity reads back as 9.9E37
    model->overrides["SOURce1:FUNCtion"] = "SIN";
    TcpPeer peer([model](const std::string& l) { return (*model)(l); });
    Generator g(session_to(peer, "generator"), generic());
    g.select_sine();
    CHECK(g.set_frequency(1000.0) == 1000.0);
    CHECK(g.set_amplitude_vpp(0.1) == Approx(0.1));
    g.set_load("high-z");
    CHECK_THROWS_AS(g.set_load("75"), InputError);
    g.set_output(true);
    CHECK(g.output_on());
    const auto cmds = commands_of(rig.snapshot(), "generator");
    CHECK(std::find(cmds.begin(), cmds.end(), "OUTPut1:LOAD INFinity") != cmds.end());
    CHECK(std::find(cmds.begin(), cmds.end(), "SOURce1:VOLTage:UNIT VPP") != cmds.end());
}

TEST_CASE("scope channels are configured, read back, captured and checked for clipping", "[net]") {
    Rig rig;
    auto model = std::make_shared<ModelInstrument>("scope", rig.log, rig.mutex);
    model->overrides["INPut1:FILTer:LPASs:FREQuency"] = "2.0E+07";
    // Five samples of int16 codes; the last sits at the converter's top code and is clipped.
    const std::string codes{"\x00\x00\x00\x64\xff\x9c\x7f\xfe\x7f\xff", 10};
    TcpPeer peer([model, codes](const std::string& l) {
        if (l == "TRACe:PREamble? (@1)") return PeerAction{"5,1E-6,-2E-6,0.001,0.5,-32768,32767\n"};
        if (l == "TRACe:DATA? (@1)") {
            (*model)(l);
            return PeerAction{encode_block(codes) + "\n", 3};
        }
        if (l == "TRACe:PREamble? (@2)") return PeerAction{"3,2E-6,0,0.001,0,-100,100\n"};
        if (l == "TRACe:DATA? (@2)") return PeerAction{"0.0,0.05,0.1\n"};
        if (l == "MEASure:VOLTage:PTPeak? (@1)") return PeerAction{"1.23E-01\n"};
        return (*model)(l);
    });
    Scope scope(session_to(peer, "scope"), generic());
    const auto st = scope.configure_channel({"1", 10.0, "dc", 20e6, 4.0, 0.0});
    CHECK(st.probe_ratio == 10.0);
    CHECK(st.bandwidth_hz == 20e6);
    CHECK(st.range_vpp == 4.0);
    scope.set_timebase(0.01, 1000);
    scope.set_trigger("1", 0.0);
    scope.single_and_wait(2.0);
    const Waveform w = scope.fetch("1");
    REQUIRE(w.volts.size() == 5);
    CHECK(w.dt_s == 1e-6);
    CHECK(w.t0_s == -2e-6);
    CHECK(w.volts[0] == Approx(0.5));
    CHECK(w.volts[1] == Approx(0.5 + 0.1));
    CHECK(w.volts[2] == Approx(0.5 - 0.1));
    CHECK(w.clipped_high == 1);
    CHECK(w.clipped_low == 0);
    const Waveform a = scope.fetch("2", WaveformEncoding::ascii);
    CHECK(a.volts.size() == 3);
    CHECK(a.clipped_high == 1);  // 0.1 V is the top of a ±100-code, 1 mV-step converter
    CHECK(scope.amplitude_vpp("1") == Approx(0.123));
    const auto cmds = commands_of(rig.snapshot(), "scope");
    CHECK(std::find(cmds.begin(), cmds.end(), "INPut1:PROBe:RATio 10") != cmds.end());
    CHECK(std::find(cmds.begin(), cmds.end(), "FORMat:DATA INTeger,16") != cmds.end());
    CHECK(std::find(cmds.begin(), cmds.end(), "INITiate:IMMediate") != cmds.end());
}

TEST_CASE("a probe ratio that reads back differently is refused", "[net]") {
    Rig rig;
    auto model = std::make_shared<ModelInstrument>("scope", rig.log, rig.mutex);
    model->overrides["INPut2:PROBe:RATio"] = "1";
    TcpPeer peer([model](const std::string& l) { return (*model)(l); });
    Scope scope(session_to(peer, "scope"), generic());
    CHECK_THROWS_WITH(scope.configure_channel({"2", 10.0, "dc", 0.0, 4.0, 0.0}),
                      Catch::Contains("channel 2 probe ratio"));
}

TEST_CASE("the meter routes channels with ROUTe:CLOSe", "[net]") {
    Rig rig;
    auto model = std::make_shared<ModelInstrument>("meter", rig.log, rig.mutex);
    model->overrides["READ"] = "+6.512E-01";
    TcpPeer peer([model](const std::string& l) { return (*model)(l); });
    Meter meter(session_to(peer, "meter"), generic());
    meter.select_dc_volts();
    meter.set_range(std::nullopt);
    CHECK(meter.measure_dc_volts("102") == Approx(0.6512));
    const auto cmds = commands_of(rig.snapshot(), "meter");
    // Source: SCPI-1999 Vol. 2 §15 ROUTe:CLOSe <channel_list>, channel list written (@n).
    CHECK(std::find(cmds.begin(), cmds.end(), "ROUTe:CLOSe (@102)") != cmds.end());
}

TEST_CASE("an instrument error after a setting names the command", "[net]") {
    Rig rig;
    auto model = std::make_shared<ModelInstrument>("scope", rig.log, rig.mutex);
    bool failed = false;
    TcpPeer peer([model, &failed](const std::string& l) {
        if (l.rfind("SENSe:SWEep:TIME ", 0) == 0) failed = true;
        if (l == "SYSTem:ERRor?" && failed) {
            failed = false;
            return PeerAction{"-222,\"Data out of range\"\n"};
        }
        return (*model)(l);
    });
    Scope scope(session_to(peer, "scope"), generic());
    CHECK_THROWS_WITH(scope.set_timebase(1e6),
                      Catch::Contains("SENSe:SWEep:TIME 1000000") && Catch::Contains("execution error -222"));
}

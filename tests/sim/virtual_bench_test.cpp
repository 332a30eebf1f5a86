// The virtual bench through the real drivers, in-process: SCPI behaviour, gain, settling,
// repeatability, faults and the supply's current limit.
#include <cmath>

#include <catch2/catch.hpp>

#include "core/errors.h"
#include "drivers/sim/virtual_bench.h"
#include "sim_rig_support.h"
#include "sim_support.h"

using namespace ampbench;
using namespace ampbench::sim;
using namespace ampbench::sim::test;

namespace {

std::string ask(VirtualBench& b, const std::string& role, const std::string& line) {
    const Outcome o = b.execute(role, line);
    return o.has_reply ? o.reply : std::string("<none>");
}

}  // namespace

TEST_CASE("SCPI: identity, unknown headers, short and long forms, error queue", "[sim][scpi]") {
    VirtualClock clock;
    VirtualBench b(ce_design(), default_virtual_bench("sim://?seed=3"), BoardSpec{3, {}, {}}, clock);
    CHECK(ask(b, "scope", "*IDN?").rfind("ampbench,virtual oscilloscope,", 0) == 0);
    // Source: SCPI-1999 Vol. 2 §21.8.9: −113 "Undefined header"; no reply for a bad query.
    CHECK(ask(b, "generator", "SOURce1:WOBBle?") == "<none>");
    CHECK(ask(b, "generator", "SYST:ERR?") == "-113,\"Undefined header\"");
    CHECK(ask(b, "generator", "SYSTem:ERRor?") == "0,\"No error\"");
    CHECK(ask(b, "generator", "sour1:freq 2500;:SOURCE1:FREQUENCY?") == "2500");
    CHECK(ask(b, "generator", "SOUR:FREQ 1e9") == "<none>");
    CHECK(ask(b, "generator", "SYST:ERR?") == "-222,\"Data out of range\"");
    CHECK(ask(b, "generator", "OUTP1:LOAD INF;LOAD?") == "<none>");  // a header path we do not keep
    CHECK(ask(b, "generator", "*CLS;OUTP1:LOAD INF;OUTP1:LOAD?") == "9.9E+37");
    CHECK(ask(b, "scope", "SENS2:VOLT:RANG:PTP 0.3;SENS2:VOLT:RANG:PTP?") == "0.5");  // 1-2-5 at 5 mV/div ×10... ×1
    CHECK(ask(b, "scope", "INP5:COUP AC") == "<none>");
    CHECK(ask(b, "scope", "SYST:ERR?") == "-114,\"Header suffix out of range\"");
    CHECK(clock.now_s() == 0.0);  // execute() alone charges nothing; the transport does
}

TEST_CASE("the supply refuses nothing but limits the current it delivers", "[sim][supply]") {
    Rig rig("sim://?seed=5");
    rig.power_up(12.0, 0.05);
    const double i_normal = rig.inst.supply->measure_current();
    CHECK(i_normal > 1e-3);
    CHECK(i_normal < 10e-3);
    rig.inst.supply->set_current_limit(1e-3);
    // The board now draws the limit and the terminal voltage drops.
    CHECK(rig.inst.supply->measure_current() == Approx(1e-3).margin(1e-5));
    CHECK(rig.inst.supply->measure_voltage() < 11.0);
}

TEST_CASE("in-process gain matches the circuit engine on the revealed board", "[sim][gain]") {
    Rig rig("sim://?seed=7");
    rig.power_up();
    const std::string revealed = rig.bench->reveal();
    for (double f : {1e3, 1e6}) {
        set_stimulus(rig.inst, f, 5e-3);
        rig.clock.sleep_s(2.0);  // well past the slowest time constant
        const auto measured = capture_gain(rig.inst, f);
        const auto truth = engine_gain(revealed, f);
        INFO("f = " << f);
        CHECK(std::abs(measured) == Approx(std::abs(truth)).epsilon(0.01));
    }
    CHECK(rig.clock.now_s() > 4.0);  // virtual time moved with the waits
}

TEST_CASE("settling is real after a large frequency step", "[sim][settling]") {
    // Coupling and bypass capacitors ×100: the bypass capacitor C2 (10 mF against about 12 Ω at
    // the emitter) now sets f_low near 1.3 Hz with a 0.13 s time constant, and the bias network
    // (R4·C2) and C3 (with R3 + RL) take seconds.
    Rig rig("sim://?seed=11", 100.0);
    rig.power_up();
    constexpr double kStepHz = 2.0, kWindowS = 0.5;  // one period at the new frequency
    set_stimulus(rig.inst, 1e3, 20e-3);
    rig.clock.sleep_s(60.0);
    // 1 kHz -> 2 Hz, just above f_low: the bypass capacitor, a short at 1 kHz, now carries
    // signal and must charge to its new swing; the output's sine and offset move until it has.
    auto capture_out = [&] {
        rig.inst.scope->set_range("2", 8.0, 0.0);
        rig.inst.scope->set_timebase(kWindowS, 4000);
        // A level the input never reaches: the scope triggers at once, as right after the step.
        rig.inst.scope->set_trigger("1", 1.0);
        rig.inst.scope->single_and_wait(30.0);
        const drivers::Waveform w = rig.inst.scope->fetch("2");
        return fit_sine(w.volts, w.dt_s, w.t0_s, kStepHz);
    };
    auto differs = [](const SineFit& a, const SineFit& b) {
        return (std::abs(a.amplitude - b.amplitude) + std::abs(a.offset - b.offset)) / b.amplitude;
    };
    const double step_at_s = rig.clock.now_s();
    set_stimulus(rig.inst, kStepHz, 20e-3);
    const SineFit early = capture_out();
    const double early_done_s = rig.clock.now_s();
    rig.clock.sleep_s(120.0);  // dozens of the slowest time constant
    const SineFit late = capture_out();
    rig.clock.sleep_s(30.0);
    const SineFit later = capture_out();
    INFO("early " << early.amplitude << "/" << early.offset << " late " << late.amplitude << "/" << late.offset
                  << " later " << later.amplitude << "/" << later.offset << "; early capture ended "
                  << early_done_s - step_at_s << " s after the step");
    // The early capture really follows the step: its window plus command latencies.
    CHECK(early_done_s - step_at_s < kWindowS + 0.2);
    CHECK(late.amplitude > 0.05);  // the stage still has gain at 2 Hz
    CHECK(differs(early, late) > 0.05);
    CHECK(differs(later, late) < 0.005);
}

TEST_CASE("same seed, same captures bit for bit, and another seed another board", "[sim][seed]") {
    auto run = [](const char* uri) {
        Rig rig(uri);
        rig.power_up();
        set_stimulus(rig.inst, 2e3, 5e-3);
        rig.clock.sleep_s(1.0);
        rig.inst.scope->set_timebase(5e-3, 1000);
        rig.inst.scope->set_trigger("1", 0.0);
        rig.inst.scope->single_and_wait(10);
        return std::make_pair(rig.inst.scope->fetch("2").volts, rig.bench->reveal());
    };
    const auto a = run("sim://?seed=21");
    const auto b = run("sim://?seed=21");
    const auto c = run("sim://?seed=22");
    CHECK(a.first == b.first);
    CHECK(a.second == b.second);
    CHECK(a.second != c.second);
}

TEST_CASE("an open bypass capacitor drops the midband gain as the engine predicts", "[sim][fault]") {
    Rig good("sim://?seed=9");
    Rig open("sim://?seed=9&fault=C2:open");
    const double f = 5e3;
    double gains[2];
    Rig* rigs[2] = {&good, &open};
    for (int i = 0; i < 2; ++i) {
        rigs[i]->power_up();
        set_stimulus(rigs[i]->inst, f, i == 0 ? 5e-3 : 50e-3);
        rigs[i]->clock.sleep_s(2.0);
        gains[i] = std::abs(capture_gain(rigs[i]->inst, f));
    }
    const double predicted = std::abs(engine_gain(open.bench->reveal(), f)) / std::abs(engine_gain(good.bench->reveal(), f));
    CHECK(gains[1] / gains[0] == Approx(predicted).epsilon(0.02));
    CHECK(predicted < 0.1);  // a fully bypassed emitter loses most of its gain
}

TEST_CASE("sim:// queries are checked", "[sim][input]") {
    CHECK_THROWS_AS(parse_board_spec("sim://?seed=x"), InputError);
    CHECK_THROWS_AS(parse_board_spec("sim://?fault=C2:melted"), InputError);
    CHECK_THROWS_AS(parse_board_spec("sim://?colour=red"), InputError);
    const BoardSpec s = parse_board_spec("sim://?seed=7&fault=C3:open&value=R4:3k3");
    CHECK(s.seed == 7);
    const circuit::Design d = draw_board(ce_design(), s);
    CHECK(d.find_part("R4")->value == Approx(3300));
    CHECK(d.find_part("C3")->kind == circuit::PartKind::resistor);
    CHECK(d.find_part("C3")->value == Approx(1e9));
    CHECK_THROWS_AS(draw_board(ce_design(), parse_board_spec("sim://?fault=Q7:open")), InputError);
}

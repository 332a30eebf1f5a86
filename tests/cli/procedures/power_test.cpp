// Power sequencing against a scripted bench that records the command order (DESIGN.md §6).
#include <sstream>

#include <catch2/catch.hpp>

#include "cli/procedures/power.h"
#include "core/errors.h"
#include "core/interrupt.h"
#include "scripted_bench_support.h"

using namespace ampbench;
using procedures::PowerPlan;
using procedures::PowerSequence;
using Events = std::vector<std::string>;

namespace {

PowerPlan plan_for(double predicted_a) {
    PowerPlan p;
    p.supply_volts = 12;
    p.current_limit_a = 0.02;
    p.predicted_quiescent_a = predicted_a;
    p.settle_s = 0.1;
    return p;
}

struct Rig {
    std::shared_ptr<testing::ScriptedBenchState> state = std::make_shared<testing::ScriptedBenchState>();
    std::unique_ptr<drivers::Generator> gen = testing::scripted_generator(state);
    std::unique_ptr<drivers::Supply> supply = testing::scripted_supply(state);
    VirtualClock clock;
};

const Events kUp = {"generator off", "supply limit", "supply limit read back", "supply on", "supply current read"};

Events concat(Events a, const Events& b) {
    a.insert(a.end(), b.begin(), b.end());
    return a;
}

}  // namespace

TEST_CASE("power up in order, down in reverse when the scope leaves", "[power]") {
    Rig rig;
    rig.state->quiescent_a = 0.0021;
    {
        PowerSequence power(rig.gen.get(), rig.supply.get(), rig.clock, plan_for(0.002));
        power.power_up();
        power.generator_on();
        CHECK(power.quiescent_a() == Approx(0.0021));
        CHECK(power.limit_read_back_a() == Approx(0.02));
    }
    CHECK(rig.state->output_events() == concat(kUp, {"generator on", "generator off", "supply off"}));
    CHECK(rig.clock.now_s() >= 0.1);  // the supply settled before its current was read
}

TEST_CASE("an error during the measurement powers down in reverse", "[power]") {
    Rig rig;
    auto measure = [&] {
        PowerSequence power(rig.gen.get(), rig.supply.get(), rig.clock, plan_for(0.002));
        power.power_up();
        power.generator_on();
        throw InstrumentError("scope", "TRACe:DATA? (@1)", "", "no data");
    };
    CHECK_THROWS_AS(measure(), InstrumentError);
    CHECK(rig.state->output_events() == concat(kUp, {"generator on", "generator off", "supply off"}));
}

TEST_CASE("Ctrl-C during a sweep powers down in reverse", "[power]") {
    Rig rig;
    clear_interrupt();
    auto sweep = [&] {
        PowerSequence power(rig.gen.get(), rig.supply.get(), rig.clock, plan_for(0.002));
        power.power_up();
        power.generator_on();
        for (int point = 0; point < 10; ++point) {
            if (point == 3) request_interrupt();  // what the SIGINT handler does
            throw_if_interrupted();
        }
    };
    CHECK_THROWS_AS(sweep(), Interrupted);
    clear_interrupt();
    CHECK(rig.state->output_events() == concat(kUp, {"generator on", "generator off", "supply off"}));
}

TEST_CASE("Ctrl-C before the supply is on leaves it off", "[power]") {
    Rig rig;
    request_interrupt();
    PowerSequence power(rig.gen.get(), rig.supply.get(), rig.clock, plan_for(0.002));
    CHECK_THROWS_AS(power.power_up(), Interrupted);
    clear_interrupt();
    // The supply never came on; it is still switched off in case an earlier run left it on.
    CHECK(rig.state->output_events() == Events{"generator off", "generator off", "supply off"});
}

TEST_CASE("quiescent current out of its window is a safety stop", "[power]") {
    const double measured = GENERATE(0.0031, 0.0009);  // 1.55× and 0.45× of 2 mA
    Rig rig;
    rig.state->quiescent_a = measured;
    PowerSequence power(rig.gen.get(), rig.supply.get(), rig.clock, plan_for(0.002));
    CHECK_THROWS_AS(power.power_up(), SafetyStop);
    CHECK_THROWS_AS(power.generator_on(), SafetyStop);  // the generator never comes on
    CHECK(rig.state->output_events() == concat(kUp, {"generator off", "supply off"}));
}

TEST_CASE("quiescent current inside the window passes at both edges", "[power]") {
    const double measured = GENERATE(0.0029, 0.0011);
    Rig rig;
    rig.state->quiescent_a = measured;
    PowerSequence power(rig.gen.get(), rig.supply.get(), rig.clock, plan_for(0.002));
    CHECK_NOTHROW(power.power_up());
}

TEST_CASE("a supply that refuses its current limit is never switched on", "[power]") {
    Rig rig;
    rig.state->fail_on = "supply: SOURce:CURRent 0.02";
    PowerSequence power(rig.gen.get(), rig.supply.get(), rig.clock, plan_for(0.002));
    CHECK_THROWS_AS(power.power_up(), InstrumentError);
    for (const std::string& e : rig.state->output_events()) CHECK(e != "supply on");
}

TEST_CASE("a generator lost at power-down still gets the supply switched off", "[power]") {
    Rig rig;
    PowerSequence power(rig.gen.get(), rig.supply.get(), rig.clock, plan_for(0.002));
    power.power_up();
    power.generator_on();
    rig.state->drop_on = "generator: OUTPut1:STATe?";  // the read-back after ON drops the link
    rig.gen->set_output(true);
    const auto problems = power.power_down();
    REQUIRE(problems.size() == 1);
    CHECK(problems[0].find("generator") != std::string::npos);
    CHECK(rig.state->output_events().back() == "supply off");
}

TEST_CASE("the safety notice is shown and confirmation asked unless --yes", "[power]") {
    std::ostringstream out;
    std::istringstream no("n\n");
    CHECK_THROWS_AS(procedures::confirm_safety(out, no, 0.02, false), SafetyStop);
    const std::string text = out.str();
    CHECK(text.find("20mA") != std::string::npos);  // the limit as set
    for (const char* word : {"ground leads", "charged", "electrostatic", "local electrical codes"})
        CHECK(text.find(word) != std::string::npos);
    std::istringstream yes("y\n");
    CHECK_NOTHROW(procedures::confirm_safety(out, yes, 0.02, false));
    std::istringstream nothing("");
    CHECK_THROWS_AS(procedures::confirm_safety(out, nothing, 0.02, false), SafetyStop);
    std::ostringstream quiet;
    CHECK_NOTHROW(procedures::confirm_safety(quiet, nothing, 0.02, true));
    CHECK(quiet.str().find("[y/N]") == std::string::npos);
}

TEST_CASE("a channel-match run drives the generator alone and switches it off on every way out", "[power][match]") {
    // The match run's sequence: no supply (nullptr), so the supply is never addressed.
    for (const bool interrupted : {false, true}) {
        Rig rig;
        {
            PowerSequence power(rig.gen.get(), nullptr, rig.clock, PowerPlan{});
            power.power_up();
            power.generator_on();
            // Interrupted: leaving the scope (the destructor) is the way out.
            if (!interrupted) power.power_down();
        }
        const Events expected{"generator off", "generator on", "generator off"};
        CHECK(rig.state->output_events() == expected);
        for (const std::string& line : rig.state->log) CHECK(line.rfind("supply:", 0) != 0);
    }
    std::ostringstream out;
    std::istringstream no("n\n");
    CHECK_THROWS_AS(procedures::confirm_or_stop(out, no, procedures::match_notice(1.0), "Both probes on one node?", "not confirmed", false),
                    SafetyStop);
    for (const char* words : {"same node", "No supply is switched on", "ground leads", "local electrical codes"})
        CHECK(out.str().find(words) != std::string::npos);
}

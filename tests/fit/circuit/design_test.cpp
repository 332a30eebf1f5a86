// The design loader: a good file loads into the expected netlist, and every error names the file,
// the part ref and the field.
#include <catch2/catch.hpp>

#include <nlohmann/json.hpp>

#include "core/errors.h"
#include "fit/circuit/design.h"
#include "fit/circuit/netlist.h"

using namespace ampbench;
using namespace ampbench::circuit;
using nlohmann::json;

namespace {

json base_design() {
    return json::parse(R"({
      "format": "ampbench-design/1", "name": "loader test",
      "supply": {"node": "vcc", "volts": "12", "current_limit": "20m"},
      "stimulus": {"node": "in"},
      "parts": [
        {"ref": "C1", "kind": "capacitor", "nodes": ["in", "b"], "value": "1u", "tol": "20%"},
        {"ref": "R1", "kind": "resistor", "nodes": ["vcc", "b"], "value": "47k", "tol": "5%"},
        {"ref": "R2", "kind": "resistor", "nodes": ["b", "gnd"], "value": "10k"},
        {"ref": "R3", "kind": "resistor", "nodes": ["vcc", "c"], "value": "2k7"},
        {"ref": "R4", "kind": "resistor", "nodes": ["e", "0"], "value": 680},
        {"ref": "C2", "kind": "capacitor", "nodes": ["e", "0"], "value": "100u"},
        {"ref": "C3", "kind": "capacitor", "nodes": ["c", "out"], "value": "10u"},
        {"ref": "RL", "kind": "resistor", "nodes": ["out", "0"], "value": "10k"},
        {"ref": "Q1", "kind": "npn", "nodes": {"c": "c", "b": "b", "e": "e"}, "model": "m"}],
      "models": {"m": {"saturation_current": "1e-14", "beta": "200", "beta_range": ["100", "300"],
                       "early_voltage": "100", "base_resistance": "10", "cje": "4.5p",
                       "cjc": "3.6p", "transit_time": "300p"}},
      "probes": {"in": "in", "out": "out"},
      "limits": {"max_input_vpp": "0.1"}})");
}

json& part(json& d, const std::string& ref) {
    for (auto& p : d["parts"])
        if (p["ref"] == ref) return p;
    throw std::logic_error("no part " + ref);
}

// Loads and expects an InputError whose message names the file and every word in `words`.
void expect_error(const json& d, std::vector<std::string> words) {
    try {
        parse_design(d.dump(), "board.design.json");
        FAIL("no error");
    } catch (const InputError& e) {
        const std::string msg = e.what();
        INFO(msg);
        CHECK(e.file() == "board.design.json");
        CHECK(msg.find("board.design.json") != std::string::npos);
        for (const auto& w : words) CHECK(msg.find(w) != std::string::npos);
    }
}

}  // namespace

TEST_CASE("a good design loads with values, tolerances and models", "[circuit][design]") {
    const Design d = parse_design(base_design().dump(), "board.design.json");
    CHECK(d.parts.size() == 9);
    CHECK(d.find_part("R1")->value == Approx(47e3));
    CHECK(d.find_part("R1")->tolerance == Approx(0.05));
    CHECK(d.find_part("R2")->nodes[1] == "0");  // "gnd" is ground
    CHECK(d.find_part("R4")->value == Approx(680));  // a plain JSON number works as well
    const TransistorModel& m = d.models.at("m");
    CHECK(m.beta == 200);
    CHECK(*m.beta_low == 100);
    CHECK(m.cje_f == Approx(4.5e-12));
    CHECK(m.junction_potential_v == 0.75);  // defaults of the issue
    CHECK(m.grading == 0.33);
    CHECK(d.supply_current_limit_a == Approx(0.02));
    CHECK(*d.max_input_vpp == Approx(0.1));

    const Netlist nl = build_netlist(d, {600.0, {{"out", 1e6, 100e-12}}});
    CHECK(nl.resistors.size() == 6);  // five parts plus the probe's 1 MΩ
    CHECK(nl.capacitors.size() == 4);
    CHECK(nl.transistors.size() == 1);
    CHECK(nl.transistors[0].b_internal != nl.transistors[0].b);  // RB makes an internal base
    CHECK(nl.generator_ohms == 600.0);
    CHECK(nl.node_names[nl.out] == "out");
}

TEST_CASE("optional model keys are read", "[circuit][design]") {
    json d = base_design();
    d["models"]["m"]["junction_potential"] = "0.7";
    d["models"]["m"]["grading"] = 0.4;
    d["models"]["m"]["reverse_beta"] = "3";
    d["models"]["m"]["emission_coefficient"] = "1.05";
    const Design loaded = parse_design(d.dump(), "x");
    const TransistorModel& m = loaded.models.at("m");
    CHECK(m.junction_potential_v == Approx(0.7));
    CHECK(m.grading == Approx(0.4));
    CHECK(m.reverse_beta == Approx(3));
    CHECK(m.emission_coefficient == Approx(1.05));
}

TEST_CASE("loader errors name the file, the part and the field", "[circuit][design]") {
    SECTION("unknown kind") {
        json d = base_design();
        part(d, "R3")["kind"] = "resistr";
        expect_error(d, {"R3", "kind", "resistr"});
    }
    SECTION("unknown model") {
        json d = base_design();
        part(d, "Q1")["model"] = "bc547";
        expect_error(d, {"Q1", "model", "bc547"});
    }
    SECTION("bad value") {
        json d = base_design();
        part(d, "R1")["value"] = "4k7k";
        expect_error(d, {"R1", "value", "4k7k"});
    }
    SECTION("bad tolerance") {
        json d = base_design();
        part(d, "R1")["tol"] = "5";
        expect_error(d, {"R1", "tol"});
    }
    SECTION("bad model value") {
        json d = base_design();
        d["models"]["m"]["beta"] = "1.2.3";
        expect_error(d, {"models.m.beta", "1.2.3"});
    }
    SECTION("duplicate ref") {
        json d = base_design();
        part(d, "R4")["ref"] = "R3";
        expect_error(d, {"R3", "ref", "duplicate"});
    }
    SECTION("node with no DC path to ground") {
        json d = base_design();
        // C3 to "out" with RL moved between out and a new node "far": out and far float.
        part(d, "RL")["nodes"] = {"out", "far"};
        expect_error(d, {"C3", "nodes", "'out'", "no DC path"});
    }
    SECTION("the generator counts as a DC path at the stimulus node") {
        json d = base_design();
        d["parts"].push_back({{"ref", "C9"}, {"kind", "capacitor"}, {"nodes", {"in", "0"}}, {"value", "1n"}});
        CHECK_NOTHROW(parse_design(d.dump(), "x"));
    }
    SECTION("a part shorted to itself") {
        json d = base_design();
        part(d, "R2")["nodes"] = {"b", "b"};
        expect_error(d, {"R2", "nodes", "shorted"});
    }
    SECTION("a transistor with every terminal on one node") {
        json d = base_design();
        part(d, "Q1")["nodes"] = {{"c", "b"}, {"b", "b"}, {"e", "b"}};
        expect_error(d, {"Q1", "nodes", "shorted"});
    }
    SECTION("missing supply") {
        json d = base_design();
        d.erase("supply");
        expect_error(d, {"supply", "missing"});
    }
    SECTION("supply node on no part") {
        json d = base_design();
        d["supply"]["node"] = "vdd";
        expect_error(d, {"supply.node", "vdd"});
    }
    SECTION("missing stimulus") {
        json d = base_design();
        d.erase("stimulus");
        expect_error(d, {"stimulus", "missing"});
    }
    SECTION("stimulus node on no part") {
        json d = base_design();
        d["stimulus"]["node"] = "inp";
        expect_error(d, {"stimulus.node", "inp"});
    }
    SECTION("missing probe") {
        json d = base_design();
        d["probes"].erase("out");
        expect_error(d, {"probes.out", "missing"});
    }
    SECTION("probe node on no part") {
        json d = base_design();
        d["probes"]["out"] = "ouput";
        expect_error(d, {"probes.out", "ouput"});
    }
    SECTION("non-positive resistance") {
        json d = base_design();
        part(d, "R4")["value"] = "0";
        expect_error(d, {"R4", "value", "positive"});
    }
    SECTION("non-positive capacitance") {
        json d = base_design();
        part(d, "C2")["value"] = -1e-6;
        expect_error(d, {"C2", "value", "positive"});
    }
    SECTION("non-positive inductance") {
        json d = base_design();
        d["parts"].push_back({{"ref", "L1"}, {"kind", "inductor"}, {"nodes", {"c", "out"}}, {"value", "-1m"}});
        expect_error(d, {"L1", "value", "positive"});
    }
    SECTION("a newer format version") {
        json d = base_design();
        d["format"] = "ampbench-design/2";
        expect_error(d, {"format", "newer"});
    }
    SECTION("another format") {
        json d = base_design();
        d["format"] = "ampbench-bench/1";
        expect_error(d, {"format", "ampbench-design/1"});
    }
    SECTION("a misspelt key") {
        json d = base_design();
        part(d, "R1")["tolerance"] = "5%";
        expect_error(d, {"R1", "tolerance", "unknown key"});
    }
    SECTION("a supply without a current limit") {
        json d = base_design();
        d["supply"].erase("current_limit");
        expect_error(d, {"supply.current_limit", "missing"});
    }
}

TEST_CASE("load_design names the file it could not read", "[circuit][design]") {
    CHECK_THROWS_WITH(load_design("/nonexistent/board.design.json"),
                      Catch::Contains("/nonexistent/board.design.json"));
}

// The circuit-model fit as a problem for tests/bench/circuit_fit_reference.py (scipy's
// least_squares on a numpy port of the same model): the netlist as fit/circuit builds it, the
// fit parameters and what each one moves, the gain points, the DC readings and the start.
// Shared by bench_fit and the scipy reference test.
#pragma once

#include <cmath>
#include <complex>
#include <cstdint>
#include <cstdlib>
#include <numbers>
#include <stdexcept>
#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "core/random.h"
#include "fit/circuit/design.h"
#include "fit/response/circuit_fit.h"

namespace ampbench::testing {

// The HVE-PA1 sample board on a beta jig: a known 10 kΩ 1 % resistor between the generator and
// the board input, the scope's 'in' probe on the generator side (the set-up the beta verdict
// advises), so every fitted parameter is determined and a fit has one clear minimum.
inline circuit::Design pa1_on_beta_jig() {
    std::string path = AMPBENCH_SOURCE_DIR;  // two steps: GCC 12's false -Warray-bounds
    path += "/sample_sessions/pa1.design.json";
    std::ifstream in(path);
    nlohmann::json jig = nlohmann::json::parse(in);
    jig["name"] = "HVE-PA1 on a beta jig";
    jig["parts"].push_back({{"ref", "RS"}, {"kind", "resistor"}, {"nodes", {"gen", "in"}}, {"value", "10k"}, {"tol", "1%"}});
    jig["stimulus"]["node"] = "gen";
    jig["probes"]["in"] = "gen";
    return circuit::parse_design(jig.dump(), "HVE-PA1 beta jig");
}

// The model's own response of the board with parts off nominal (BF 330 instead of the design's,
// C3 −12 %, C1 −7 %, R1 +0.7 %) at `points` log-spaced frequencies over 1 Hz–10 MHz with seeded
// noise of 0.05 dB and 0.3°; with `dc`, the meter's readings of b, e and c with the sweep's
// uncertainty (0.05 % of reading over √3 plus 0.1 mV) and that much noise.
inline fit::GainData off_nominal_response(const circuit::Design& design, const circuit::BenchLoading& bench, int points,
                                          std::uint64_t seed, std::vector<fit::DcReading>* dc) {
    fit::CircuitModel truth(design, bench, {"Q1.beta", "C3"});
    std::vector<double> p = truth.nominal();
    for (std::size_t j = 0; j < p.size(); ++j) {
        const std::string& name = truth.parameters()[j].name;
        if (name == "Q1.beta") p[j] = 330;
        if (name == "C3") p[j] *= 0.88;
        if (name == "C1") p[j] *= 0.93;
        if (name == "R1") p[j] *= 1.007;
    }
    if (!truth.set(p)) throw std::runtime_error("off_nominal_response: no operating point");
    Random noise(seed);
    if (dc)
        for (const char* node : {"b", "e", "c"}) {
            const double v = truth.operating_point().node_volts[static_cast<std::size_t>(truth.netlist().node_index(node))];
            const double u = std::abs(v) * 0.0005 / std::sqrt(3.0) + 1e-4;
            dc->push_back({node, v + noise.normal(0, u), u});
        }
    fit::GainData g;
    g.has_sd = true;
    for (int i = 0; i < points; ++i) {
        const double f = std::pow(1e7, i / double(points - 1));
        const std::complex<double> h = truth.gain(f);
        g.points.push_back({f, 20 * std::log10(std::abs(h)) + noise.normal(0, 0.05),
                            fit::wrap_deg(std::arg(h) * 180 / std::numbers::pi + noise.normal(0, 0.3)), 0.05, 0.3});
    }
    return g;
}

inline nlohmann::json circuit_scipy_problem(const circuit::Design& design, const circuit::BenchLoading& bench,
                                            const fit::GainData& data, const fit::CircuitFitOptions& options,
                                            int repeats) {
    fit::CircuitModel model(design, bench, options.free);
    const std::vector<double> start = model.nominal();
    model.set(start);
    const circuit::Netlist& nl = model.netlist();
    nlohmann::json j;
    j["node_count"] = nl.node_count();
    j["unknown_count"] = nl.unknown_count();
    j["vt"] = nl.vt;
    j["stimulus"] = nl.stimulus;
    j["generator_ohms"] = nl.generator_ohms;
    j["in"] = nl.in;
    j["out"] = nl.out;
    j["resistors"] = nlohmann::json::array();
    for (const auto& r : nl.resistors) j["resistors"].push_back({r.a, r.b, r.ohms, r.part});
    j["capacitors"] = nlohmann::json::array();
    for (const auto& c : nl.capacitors) j["capacitors"].push_back({c.a, c.b, c.farads, c.part});
    j["vsources"] = nlohmann::json::array();
    for (const auto& v : nl.vsources) j["vsources"].push_back({v.plus, v.minus, v.volts, v.part, v.branch});
    j["isources"] = nlohmann::json::array();
    for (const auto& s : nl.isources) j["isources"].push_back({s.from, s.to, s.amps, s.part});
    if (!nl.inductors.empty()) throw std::runtime_error("circuit_scipy_problem: the scipy port has no inductors");
    j["transistors"] = nlohmann::json::array();
    for (const auto& t : nl.transistors) {
        const circuit::BjtParams& p = t.params;
        j["transistors"].push_back({{"c", t.c}, {"b", t.b}, {"e", t.e}, {"bi", t.b_internal}, {"part", t.part},
                                    {"polarity", p.polarity}, {"is", p.is_a}, {"bf", p.bf}, {"br", p.br},
                                    {"nf", p.nf}, {"nr", p.nr}, {"vaf", p.vaf_v}, {"rb", p.rb_ohm},
                                    {"cje", p.cje_f}, {"vje", p.vje_v}, {"mje", p.mje}, {"cjc", p.cjc_f},
                                    {"vjc", p.vjc_v}, {"mjc", p.mjc}, {"fc", p.fc}, {"tf", p.tf_s}});
    }
    // What each parameter moves: a part's value (BF for a transistor's ".beta"), or a named
    // transistor parameter.
    for (const fit::CircuitParameter& cp : model.parameters()) {
        const std::size_t dot = cp.name.find('.');
        const circuit::Part* part = design.find_part(cp.name.substr(0, dot));
        const int index = static_cast<int>(part - design.parts.data());
        std::string target = "value";
        int transistor = -1;
        if (dot != std::string::npos) {
            const std::string what = cp.name.substr(dot + 1);
            for (std::size_t k = 0; k < nl.transistors.size(); ++k)
                if (nl.transistors[k].part == index) transistor = static_cast<int>(k);
            if (what != "beta" && what != "bf") target = what;
        }
        j["params"].push_back({{"name", cp.name}, {"part", index}, {"transistor", transistor}, {"target", target},
                               {"nominal", cp.nominal}, {"free", cp.free}, {"prior_sd_ln", cp.prior_sd_ln}});
    }
    const fit::GainData d = fit::prepare_gain_data(data);
    if (!d.has_sd) throw std::runtime_error("circuit_scipy_problem: the points need their standard deviations");
    for (const fit::GainPoint& p : d.points) {
        j["freq_hz"].push_back(p.freq_hz);
        j["gain_db"].push_back(p.gain_db);
        j["phase_deg"].push_back(p.phase_deg);
        j["gain_db_sd"].push_back(p.gain_db_sd);
        j["phase_deg_sd"].push_back(p.phase_deg_sd);
    }
    j["has_phase"] = d.has_phase;
    j["dc_readings"] = nlohmann::json::array();
    for (const fit::DcReading& r : options.dc_readings)
        j["dc_readings"].push_back({{"node", nl.node_index(r.node)}, {"volts", r.volts}, {"sd_volts", r.sd_volts}});
    j["start"] = start;
    // The tolerances fit_circuit gives its engine.
    j["ftol"] = options.tolerance;
    j["xtol"] = options.tolerance;
    j["repeats"] = repeats;
    return j;
}

// Runs the scipy script on the problem; the parsed result, or null JSON when the script fails.
inline nlohmann::json run_circuit_scipy(const nlohmann::json& problem, const std::filesystem::path& dir) {
    std::filesystem::create_directories(dir);
    const auto problem_path = dir / "circuit_problem.json";
    const auto result_path = dir / "circuit_result.json";
    std::ofstream(problem_path) << problem.dump();
    std::string script = AMPBENCH_SOURCE_DIR;
    script += "/tests/bench/circuit_fit_reference.py";
    const std::string cmd =
        fmt::format("/usr/bin/python3 '{}' '{}' > '{}'", script, problem_path.string(), result_path.string());
    if (std::system(cmd.c_str()) != 0) return nullptr;
    std::ifstream in(result_path);
    return nlohmann::json::parse(in, nullptr, false);
}

}  // namespace ampbench::testing

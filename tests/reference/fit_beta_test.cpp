// Effective beta from a circuit-model fit (issue 7, acceptance 5). The "measured" response is
// ngspice's AC analysis (`ngspice -b`) of a board whose parts sit off their nominal values and
// whose transistor has a BF unlike the design's; ngspice also gives the board's true
// β0 = gm/gpi at its operating point. The fit only knows the nominal design and its tolerances.
#include <catch2/catch.hpp>

#include <cmath>
#include <complex>
#include <filesystem>
#include <fstream>
#include <map>
#include <numbers>
#include <sstream>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "circuit_deck_support.h"
#include "cli/app.h"
#include "core/random.h"
#include "fit/circuit/design.h"
#include "fit/circuit/netlist.h"
#include "fit/extract/beta.h"
#include "fit/response/circuit_fit.h"
#include "fit/response/rational_model.h"
#include "store/archive.h"

using namespace ampbench;

namespace {

// An HVE-PA1-like common-emitter stage. With `series_ohms` > 0 a resistor RS sits between the
// generator and the board input and the scope's 'in' probe is on the generator side of it.
// `bias_tol` is the tolerance of the bias divider R1/R2.
std::string board_json(const std::map<std::string, double>& v, double bf, double series_ohms,
                       const std::string& bias_tol = "1%") {
    auto num = [](double x) { return fmt::format("\"{:.10g}\"", x); };
    std::string parts;
    const std::string in_node = series_ohms > 0 ? "gen" : "in";
    if (series_ohms > 0)
        parts += fmt::format(R"({{ "ref": "RS", "kind": "resistor", "nodes": ["gen", "in"], "value": {}, "tol": "1%" }},)",
                             num(series_ohms));
    parts += fmt::format(R"(
    {{ "ref": "C1", "kind": "capacitor", "nodes": ["in", "b"], "value": {}, "tol": "10%" }},
    {{ "ref": "R1", "kind": "resistor", "nodes": ["vcc", "b"], "value": {}, "tol": "{}" }},
    {{ "ref": "R2", "kind": "resistor", "nodes": ["b", "0"], "value": {}, "tol": "{}" }},
    {{ "ref": "R3", "kind": "resistor", "nodes": ["vcc", "c"], "value": {}, "tol": "1%" }},
    {{ "ref": "R4", "kind": "resistor", "nodes": ["e", "0"], "value": {}, "tol": "1%" }},
    {{ "ref": "C2", "kind": "capacitor", "nodes": ["e", "0"], "value": {}, "tol": "20%" }},
    {{ "ref": "C3", "kind": "capacitor", "nodes": ["c", "out"], "value": {}, "tol": "20%" }},
    {{ "ref": "RL", "kind": "resistor", "nodes": ["out", "0"], "value": {}, "tol": "1%" }},
    {{ "ref": "Q1", "kind": "npn", "nodes": {{ "c": "c", "b": "b", "e": "e" }}, "model": "lownoise" }})",
                         num(v.at("C1")), num(v.at("R1")), bias_tol, num(v.at("R2")), bias_tol, num(v.at("R3")), num(v.at("R4")),
                         num(v.at("C2")), num(v.at("C3")), num(v.at("RL")));
    return fmt::format(R"({{ "format": "ampbench-design/1", "name": "HVE-PA1 on the beta jig",
  "supply": {{ "node": "vcc", "volts": "12", "current_limit": "20m" }},
  "stimulus": {{ "node": "{}" }},
  "parts": [ {} ],
  "models": {{ "lownoise": {{ "saturation_current": "1.8e-14", "beta": {}, "beta_range": ["270", "520"],
      "early_voltage": "80", "base_resistance": "50", "cje": "11p", "cjc": "4p", "transit_time": "420p" }} }},
  "probes": {{ "in": "{}", "out": "out" }} }})",
                       in_node, parts, num(bf), in_node);
}

const std::map<std::string, double> kNominal = {{"C1", 10e-6}, {"R1", 82e3}, {"R2", 15e3}, {"R3", 5.6e3},
                                                {"R4", 1.2e3}, {"C2", 220e-6}, {"C3", 10e-6}, {"RL", 47e3}};
// The board as built: every part inside its tolerance, none at nominal.
const std::map<std::string, double> kBuilt = {{"C1", 9.3e-6}, {"R1", 82.6e3}, {"R2", 14.9e3}, {"R3", 5.63e3},
                                              {"R4", 1.19e3}, {"C2", 241e-6}, {"C3", 8.8e-6}, {"RL", 47.2e3}};
constexpr double kBuiltBf = 330.0;  // design says 400
// The same board with a precision bias divider: R1 and R2 are 0.1 % parts and sit inside it.
std::map<std::string, double> precision_divider_build() {
    std::map<std::string, double> v = kBuilt;
    v["R1"] = 82.05e3;
    v["R2"] = 14.99e3;
    return v;
}

struct Simulated {
    fit::GainData data;
    double beta0 = 0;  // ngspice's gm/gpi of Q1
    std::map<std::string, double> node_volts;  // ngspice .op: V(b), V(e), V(c)
};

// ngspice AC analysis of the built board (20 points per decade, 1 Hz–10 MHz) with seeded noise
// of 0.05 dB and 0.3° on every point, and its small-signal β0 at the operating point.
Simulated simulate(double series_ohms, const circuit::BenchLoading& bench, const std::string& tag,
                   const std::map<std::string, double>& as_built = kBuilt) {
    const circuit::Design built = circuit::parse_design(board_json(as_built, kBuiltBf, series_ohms), "built board");
    std::ostringstream deck;
    deck << testing::spice_circuit(built, bench);
    deck << ".control\nset wr_singlescale\nset wr_vecnames\noption gmin=1e-12\nop\n";
    deck << "let beta0 = @q_q1[gm] / @q_q1[gpi]\nwrdata op.txt beta0\n";
    deck << "wrdata dc.txt v(" << testing::spice_node("b") << ") v(" << testing::spice_node("e") << ") v("
         << testing::spice_node("c") << ")\n";
    const std::string in = testing::spice_node(built.probe_node("in"));
    const std::string out = testing::spice_node(built.probe_node("out"));
    deck << "ac dec 20 1 1e7\nwrdata ac.txt v(" << out << ") v(" << in << ")\n.endc\n.end\n";
    const auto dir = testing::scratch_dir("beta-" + tag);
    REQUIRE(testing::run_ngspice(dir, deck.str()));
    Simulated s;
    const testing::WrData op = testing::read_wrdata((dir / "op.txt").string());
    REQUIRE(op.rows.size() == 1);
    s.beta0 = op.rows[0].back();
    {
        const testing::WrData dc = testing::read_wrdata((dir / "dc.txt").string());
        REQUIRE(dc.rows.size() == 1);
        for (const char* node : {"b", "e", "c"})
            for (std::size_t i = 0; i < dc.names.size(); ++i)
                if (dc.names[i] == "v(" + testing::spice_node(node) + ")") s.node_volts[node] = dc.rows[0][i];
        REQUIRE(s.node_volts.size() == 3);
    }
    const testing::WrData ac = testing::read_wrdata((dir / "ac.txt").string());
    auto column = [&](const std::string& name) {
        for (std::size_t i = 0; i < ac.names.size(); ++i)
            if (ac.names[i] == name) return i;
        FAIL("ngspice wrote no column " << name);
        return std::size_t{0};
    };
    const std::size_t co = column("v(" + out + ")"), ci = column("v(" + in + ")");
    Random rng(2611);
    s.data.origin = "ngspice " + tag;
    s.data.has_sd = true;
    for (const auto& row : ac.rows) {
        const std::complex<double> h = std::complex<double>(row[co], row[co + 1]) / std::complex<double>(row[ci], row[ci + 1]);
        s.data.points.push_back({row[0], 20 * std::log10(std::abs(h)) + rng.normal(0, 0.05),
                                 fit::wrap_deg(std::arg(h) * 180 / std::numbers::pi + rng.normal(0, 0.3)), 0.05, 0.3});
    }
    std::filesystem::remove_all(dir);
    return s;
}

// The bench file of scope_bench(): a 50 Ω generator and two 10 MΩ ‖ 12 pF probes.
constexpr const char* kScopeBenchText = R"({ "format": "ampbench-bench/1", "mains_hz": 50,
  "generator": { "uri": "sim://?seed=1", "profile": "scpi-generic", "output_ohms": "50" },
  "scope": { "uri": "sim://?seed=1", "profile": "scpi-generic", "channels": {
     "1": { "probe": "in", "ratio": 10, "ohms": "10M", "farads": "12p" },
     "2": { "probe": "out", "ratio": 10, "ohms": "10M", "farads": "12p" } } } })";

// Identified, within 5 % of the true β0 and inside its interval. Source: ngspice's
// β0 = gm/gpi of the simulated board's Q1 (BF 330) at its .op.
void check_identified(const extract::EffectiveBeta& b, double ngspice_beta0) {
    INFO(b.brief() << " / ngspice beta0 " << ngspice_beta0);
    CHECK(b.verdict == extract::kBetaIdentified);
    CHECK(std::abs(b.beta0 / ngspice_beta0 - 1) < 0.05);
    CHECK(b.ci_low < ngspice_beta0);
    CHECK(b.ci_high > ngspice_beta0);
}

circuit::BenchLoading scope_bench() {
    circuit::BenchLoading b;
    b.generator_ohms = 50;
    b.probes = {{"in", 10e6, 12e-12}, {"out", 10e6, 12e-12}};
    return b;
}

}  // namespace

TEST_CASE("beta_eff is identified within 5 % through a known series resistance", "[reference][beta]") {
    const circuit::BenchLoading bench = scope_bench();
    const double rs = 10e3;
    const Simulated sim = simulate(rs, bench, "series");
    const circuit::Design design = circuit::parse_design(board_json(kNominal, 400, rs), "beta jig design");
    fit::CircuitFitOptions opt;
    opt.free = {"Q1.beta", "C3"};
    const fit::CircuitFit f = fit::fit_circuit(design, bench, sim.data, opt);
    INFO(f.brief());
    REQUIRE(f.usable());
    const extract::EffectiveBeta b = extract::effective_beta(f, design, bench);
    check_identified(b, sim.beta0);
    CHECK(b.hfe > 0);
    CHECK(b.bf > 0);
    CHECK(f.report.chi2_reduced < 2.0);
}

TEST_CASE("beta_eff is not identifiable on a 50 ohm generator probing the board input", "[reference][beta]") {
    const circuit::BenchLoading bench = scope_bench();
    const Simulated sim = simulate(0, bench, "direct");
    const circuit::Design design = circuit::parse_design(board_json(kNominal, 400, 0), "beta jig design");
    fit::CircuitFitOptions opt;
    opt.free = {"Q1.beta", "C3"};
    const fit::CircuitFit f = fit::fit_circuit(design, bench, sim.data, opt);
    INFO(f.brief());
    const extract::EffectiveBeta b = extract::effective_beta(f, design, bench);
    INFO(b.brief());
    CHECK(b.verdict == extract::kBetaNotIdentifiable);
    CHECK(!b.reason.empty());
    CHECK(b.advice.find("series resistance") != std::string::npos);
    CHECK(b.advice.find("generator side") != std::string::npos);
    CHECK(b.advice.find("DC readings") != std::string::npos);
}

TEST_CASE("ampbench fit --model circuit --json reports beta_eff and stores nothing without a session",
          "[reference][beta][cli]") {
    const circuit::BenchLoading bench = scope_bench();
    const double rs = 10e3;
    const Simulated sim = simulate(rs, bench, "cli");
    const auto dir = testing::scratch_dir("beta-cli-files");
    const auto design_path = dir / "jig.design.json";
    std::ofstream(design_path) << board_json(kNominal, 400, rs);
    const auto bench_path = dir / "jig.bench.json";
    std::ofstream(bench_path) << kScopeBenchText;
    const auto csv = dir / "board.csv";
    {
        std::ofstream c(csv);
        c << "# HVE-PA1 PA1-2611-0042 on the beta jig, ngspice\nfreq_hz,gain_db,phase_deg,gain_db_sd,phase_deg_sd\n";
        for (const fit::GainPoint& p : sim.data.points)
            c << fmt::format("{:.10g},{:.10g},{:.10g},0.05,0.3\n", p.freq_hz, p.gain_db, p.phase_deg);
    }
    std::ostringstream out, err;
    const int code = cli::run({"fit", "--csv", csv.string(), "--design", design_path.string(), "--bench",
                               bench_path.string(), "--model", "circuit", "--free", "Q1.beta, C3", "--json"},
                              out, err);
    INFO(err.str());
    REQUIRE(code == 0);
    const nlohmann::json j = nlohmann::json::parse(out.str());
    CHECK(j["model"] == "circuit");
    CHECK(j["status"] == "converged");
    CHECK(j["beta_verdict"] == "identified");
    // Source: ngspice's β0 = gm/gpi of the simulated board.
    CHECK(std::abs(j["beta_eff"].get<double>() / sim.beta0 - 1) < 0.05);
    CHECK(j["beta_eff_ci"][0].get<double>() < j["beta_eff"].get<double>());
    CHECK(j["beta_eff_ci"][1].get<double>() > j["beta_eff"].get<double>());
    CHECK(j["beta_eff_bf"].get<double>() > 0);
    CHECK(j["f_low_hz"].is_number());
    CHECK(j["f_high_hz"].is_number());

    std::ostringstream out2, err2;
    CHECK(cli::run({"fit", "--csv", csv.string(), "--design", design_path.string(), "--free", "Q9.beta"}, out2, err2) ==
          2);
    CHECK(err2.str().find("Q9") != std::string::npos);
    std::filesystem::remove_all(dir);
}

// The base current shows in the DC readings only as the drop it causes across the bias divider's
// Thevenin resistance (about 38 mV here); the divider's own tolerance moves its Thevenin voltage
// by about 7 mV (1σ) with 1 % parts, which leaves beta near ±20 %, and by 0.7 mV with 0.1 %
// parts. So the readings identify beta on a board whose bias divider is a precision one.
TEST_CASE("DC readings of base, emitter and collector identify beta on a 50 ohm generator at the board input",
          "[reference][beta]") {
    const circuit::BenchLoading bench = scope_bench();
    const Simulated sim = simulate(0, bench, "direct-dc", precision_divider_build());
    const circuit::Design design = circuit::parse_design(board_json(kNominal, 400, 0, "0.1%"), "beta jig design");
    fit::CircuitFitOptions opt;
    opt.free = {"Q1.beta", "C3"};
    // The meter's readings: ngspice's .op node voltages of the built board with the sweep's
    // uncertainty for a 0.05 % meter (reading·0.0005/√3 + 0.1 mV) and that much seeded noise.
    Random rng(4242);
    for (const auto& [node, v] : sim.node_volts) {
        const double u = std::abs(v) * 0.0005 / std::sqrt(3.0) + 1e-4;
        opt.dc_readings.push_back({node, v + rng.normal(0, u), u});
    }
    const fit::CircuitFit f = fit::fit_circuit(design, bench, sim.data, opt);
    INFO(f.brief());
    REQUIRE(f.usable());
    REQUIRE(f.dc_model_volts.size() == 3);
    for (std::size_t k = 0; k < 3; ++k) {
        INFO(f.dc_readings[k].node << ": model " << f.dc_model_volts[k] << " V, reading " << f.dc_readings[k].volts);
        CHECK(std::abs(f.dc_model_volts[k] - f.dc_readings[k].volts) < 4 * f.dc_readings[k].sd_volts);
    }
    check_identified(extract::effective_beta(f, design, bench), sim.beta0);
    CHECK(f.report.chi2_reduced < 2.0);

    // The same AC data without the readings leave beta unidentified (the case above).
    fit::CircuitFitOptions ac_only = opt;
    ac_only.dc_readings.clear();
    const fit::CircuitFit g = fit::fit_circuit(design, bench, sim.data, ac_only);
    CHECK(extract::effective_beta(g, design, bench).verdict == extract::kBetaNotIdentifiable);

    // `ampbench fit SESSION --model circuit` takes the readings (and the bench) from the
    // session's sweep set-up record.
    const auto dir = testing::scratch_dir("beta-dc-session");
    const auto design_path = dir / "jig.design.json";
    std::ofstream(design_path) << board_json(kNominal, 400, 0, "0.1%");
    const auto db = dir / "archive.sqlite";
    std::int64_t session_id = 0;
    {
        auto archive = store::open_archive(db.string());
        store::NewSession ns;
        ns.board_serial = "PA1-2611-0042";
        std::vector<store::Point> points;
        for (const fit::GainPoint& p : sim.data.points) {
            store::Point sp;
            sp.freq_hz = p.freq_hz;
            sp.gain_db = p.gain_db;
            sp.gain_db_sd = p.gain_db_sd;
            sp.phase_deg = p.phase_deg;
            sp.phase_deg_sd = p.phase_deg_sd;
            points.push_back(sp);
        }
        session_id = archive->import_session(ns, points).id;
        nlohmann::json dc = nlohmann::json::array();
        for (const fit::DcReading& r : opt.dc_readings)
            dc.push_back({{"channel", "1"}, {"node", r.node}, {"volts", r.volts}, {"u_v", r.sd_volts}});
        const std::string bench_text = kScopeBenchText;
        store::FitRecord setup;
        setup.session_id = session_id;
        setup.kind = "setup";
        setup.params_json = nlohmann::json{{"bench_text", bench_text}, {"quiescent_a", 0.001}, {"dc", dc}}.dump();
        archive->add_fit(setup);
    }
    std::ostringstream out, err;
    const int code = cli::run({"--db", db.string(), "fit", std::to_string(session_id), "--design", design_path.string(),
                               "--model", "circuit", "--free", "Q1.beta,C3", "--json"},
                              out, err);
    INFO(err.str());
    REQUIRE(code == 0);
    const nlohmann::json j = nlohmann::json::parse(out.str());
    CHECK(j["dc_readings"].size() == 3);
    CHECK(j["beta_verdict"] == "identified");
    // Source: ngspice's β0 = gm/gpi of the simulated board.
    CHECK(std::abs(j["beta_eff"].get<double>() / sim.beta0 - 1) < 0.05);
    std::filesystem::remove_all(dir);
}

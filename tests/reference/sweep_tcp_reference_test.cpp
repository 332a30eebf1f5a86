// `ampbench sweep` end to end over TCP against `ampbench simulate` (both the executable, as a
// user runs them): for three seeds of HVE-PA1 the fitted midband gain and corners are checked
// against ngspice's AC analysis of the board the server says it simulated.
#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <optional>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "fit/circuit/design.h"
#include "common/child_process.h"
#include "reference/circuit_deck_support.h"


using namespace ampbench;

namespace {

std::string slurp(const std::filesystem::path& p) {
    std::ifstream in(p, std::ios::binary);
    std::ostringstream s;
    s << in.rdbuf();
    return s.str();
}

struct SpiceTruth {
    double midband_gain_db = 0;
    std::optional<double> f_low_hz, f_high_hz;
};

// −3 dB crossing between grid points a and b, interpolated in log frequency.
double crossing(const std::vector<double>& f, const std::vector<double>& db, size_t a, size_t b, double level) {
    const double t = (level - db[a]) / (db[b] - db[a]);
    return std::exp(std::log(f[a]) + t * (std::log(f[b]) - std::log(f[a])));
}

// Source: ngspice `.ac` of the revealed board (its probes are parts of the design), 400 points
// per decade; midband = max |V(out)/V(in)|, corners = the −3 dB crossings either side (DESIGN.md §5).
SpiceTruth ngspice_truth(const circuit::Design& revealed, const std::string& tag) {
    std::string deck = testing::spice_circuit(revealed, {});
    deck += ".control\nset wr_singlescale\nset wr_vecnames\nac dec 400 0.05 200Meg\nlet g = vm(n_out)/vm(n_in)\nwrdata ac.txt g\n.endc\n.end\n";
    const auto dir = testing::scratch_dir("sweep-tcp-" + tag);
    REQUIRE(testing::run_ngspice(dir, deck));
    const testing::WrData d = testing::read_wrdata((dir / "ac.txt").string());
    REQUIRE(d.rows.size() > 100);
    std::vector<double> f, db;
    for (const auto& row : d.rows) {
        REQUIRE(row.size() >= 2);
        f.push_back(row[0]);
        db.push_back(20 * std::log10(row[1]));
    }
    const size_t peak = static_cast<size_t>(std::max_element(db.begin(), db.end()) - db.begin());
    SpiceTruth t;
    t.midband_gain_db = db[peak];
    const double level = db[peak] - 10 * std::log10(2.0);
    for (size_t i = peak; i > 0; --i)
        if (db[i - 1] < level) {
            t.f_low_hz = crossing(f, db, i - 1, i, level);
            break;
        }
    for (size_t i = peak; i + 1 < db.size(); ++i)
        if (db[i + 1] < level) {
            t.f_high_hz = crossing(f, db, i, i + 1, level);
            break;
        }
    return t;
}

// The sample virtual bench with each instrument at the server's port.
std::string tcp_bench_text(const std::vector<int>& ports) {
    nlohmann::json j = nlohmann::json::parse(slurp(std::string(AMPBENCH_SOURCE_DIR) + "/sample_sessions/virtual.bench.json"));
    const char* roles[] = {"generator", "scope", "meter", "supply"};
    for (size_t i = 0; i < 4; ++i) j[roles[i]]["uri"] = "tcp://127.0.0.1:" + std::to_string(ports[i]);
    return j.dump(2);
}

// One seed end to end; each seed is its own test case so ctest's per-case timeout covers one sweep.
void check_seed(int seed) {
    const std::string design = std::string(AMPBENCH_SOURCE_DIR) + "/sample_sessions/pa1.design.json";
    const std::string sim_bench = std::string(AMPBENCH_SOURCE_DIR) + "/sample_sessions/virtual.bench.json";
    const auto dir = testing::scratch_dir("sweep-tcp-" + std::to_string(seed));
    const std::string tag = std::to_string(seed);
    const std::string reveal = (dir / ("board-" + tag + ".design.json")).string();
    // The server simulates with the sample bench's probes and generator, so the client's
    // bench file (the same file at TCP addresses) describes what is really connected.
    // Virtual time runs 20× wall time: settling waits and captures shrink, the board's
    // physics do not.
    testing::ChildProcess server(
        testing::ampbench_argv({"simulate", "--design", design, "--bench", sim_bench, "--seed", tag, "--reveal", reveal, "--time-scale", "20"}),
        {"", (dir / ("server-" + tag + ".err")).string()});
    const std::vector<int> ports = server.ready_ports();
    REQUIRE(ports.size() == 4);
    const std::string bench = (dir / ("tcp-" + tag + ".bench.json")).string();
    std::ofstream(bench) << tcp_bench_text(ports);

    // A coarse plan (3 per decade, default limits a decade beyond each predicted corner);
    // the sweep's adaptive points locate the corners.
    const std::string out = (dir / ("sweep-" + tag + ".json")).string(), err = (dir / ("sweep-" + tag + ".err")).string();
    testing::ChildProcess sweep(testing::ampbench_argv({"--db", (dir / ("archive-" + tag + ".sqlite")).string(), "sweep", "--bench", bench,
                                                        "--design", design, "--board", "PA1-2611-09" + tag, "--yes", "--json",
                                                        "--no-progress", "--per-decade", "3", "--tolerance-runs", "100"}),
                                {out, err});
    const int code = sweep.wait(1500);
    INFO(slurp(err));
    REQUIRE(code == 0);
    const nlohmann::json j = nlohmann::json::parse(slurp(out));
    CHECK(j.at("virtual_s").is_null());  // real instruments as far as the sweep can tell

    const SpiceTruth truth = ngspice_truth(circuit::load_design(reveal), tag);
    REQUIRE(truth.f_low_hz);
    REQUIRE(truth.f_high_hz);
    const auto& fit = j.at("fit");
    INFO(fit.dump(1));
    const double gain = fit.at("midband_gain_db").get<double>();
    REQUIRE(fit.at("f_low_hz").is_number());
    REQUIRE(fit.at("f_high_hz").is_number());
    const double f_low = fit.at("f_low_hz").get<double>(), f_high = fit.at("f_high_hz").get<double>();
    INFO("seed " << seed << ": fitted " << gain << " dB, " << f_low << " Hz, " << f_high << " Hz; ngspice " << truth.midband_gain_db
                 << " dB, " << *truth.f_low_hz << " Hz, " << *truth.f_high_hz << " Hz");
    WARN("seed " << seed << ": gain error " << gain - truth.midband_gain_db << " dB, f_low error "
                 << 100 * (f_low / *truth.f_low_hz - 1) << " %, f_high error " << 100 * (f_high / *truth.f_high_hz - 1) << " %");
    // Acceptance (issue 8): 0.2 dB and 3 % of the ngspice values.
    CHECK(gain == Approx(truth.midband_gain_db).margin(0.2));
    CHECK(f_low == Approx(*truth.f_low_hz).epsilon(0.03));
    CHECK(f_high == Approx(*truth.f_high_hz).epsilon(0.03));
    CHECK(server.wait(30, true) == 0);
}

}  // namespace

TEST_CASE("a sweep over TCP against ampbench simulate fits the ngspice gain and corners (seed 31)", "[reference][net][sweep]") {
    check_seed(31);
}
TEST_CASE("a sweep over TCP against ampbench simulate fits the ngspice gain and corners (seed 32)", "[reference][net][sweep]") {
    check_seed(32);
}
TEST_CASE("a sweep over TCP against ampbench simulate fits the ngspice gain and corners (seed 33)", "[reference][net][sweep]") {
    check_seed(33);
}

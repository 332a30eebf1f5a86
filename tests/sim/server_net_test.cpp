// `ampbench simulate` as a user runs it: a child process serving the virtual bench over TCP,
// measured with the real drivers and checked against ngspice's AC gain of the revealed board.
#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <complex>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include <catch2/catch.hpp>

#include "core/bench_file.h"
#include "drivers/bench_instruments.h"
#include "fit/circuit/design.h"
#include "reference/circuit_deck_support.h"
#include "sim_rig_support.h"
#include "common/child_process.h"
#include "sim_support.h"


using namespace ampbench;
using namespace ampbench::sim::test;

namespace {

// One `ampbench simulate` of the sample design, listening on free ports; `extra` follows.
std::vector<std::string> simulate_argv(const std::vector<std::string>& extra) {
    std::vector<std::string> args{"simulate", "--design", std::string(AMPBENCH_SOURCE_DIR) + "/sample_sessions/pa1.design.json",
                                  "--listen", "127.0.0.1:0"};
    args.insert(args.end(), extra.begin(), extra.end());
    return ampbench::testing::ampbench_argv(args);
}

// The default probes and generator, with the instruments at the server's ports.
BenchFile tcp_bench(const std::vector<int>& ports) {
    BenchFile bench = default_virtual_bench();
    auto uri = [&](int i) { return "tcp://127.0.0.1:" + std::to_string(ports[static_cast<size_t>(i)]); };
    bench.generator.uri = uri(0);
    bench.scope.uri = uri(1);
    bench.meter.uri = uri(2);
    bench.supply.uri = uri(3);
    return bench;
}

// |V(out)/V(in)| of the revealed design by ngspice `.ac` (its probes are parts of the design).
std::vector<double> ngspice_gains(const circuit::Design& revealed, const std::vector<double>& freqs_hz) {
    std::string deck = testing::spice_circuit(revealed, {});
    deck += ".control\nset wr_singlescale\nset wr_vecnames\n";
    for (size_t k = 0; k < freqs_hz.size(); ++k) {
        const std::string f = testing::spice_number(freqs_hz[k]);
        deck += "ac lin 1 " + f + " " + f + "\nlet g = vm(n_out)/vm(n_in)\nwrdata ac" + std::to_string(k) +
                ".txt g\n";
    }
    deck += ".endc\n.end\n";
    const auto dir = testing::scratch_dir("sim-net-ac");
    REQUIRE(testing::run_ngspice(dir, deck));
    std::vector<double> gains;
    for (size_t k = 0; k < freqs_hz.size(); ++k) {
        const testing::WrData d = testing::read_wrdata((dir / ("ac" + std::to_string(k) + ".txt")).string());
        REQUIRE(!d.rows.empty());
        REQUIRE(d.rows[0].size() >= 2);
        gains.push_back(d.rows[0][1]);
    }
    return gains;
}

}  // namespace

TEST_CASE("through the TCP server the gain matches ngspice's AC gain of the revealed board", "[sim][net]") {
    const std::string reveal = write_temp_file("net-reveal.design.json", "");
    // Time runs 50× wall time: the two-second settling waits take 40 ms.
    ampbench::testing::ChildProcess server(simulate_argv({"--seed", "5", "--reveal", reveal, "--time-scale", "50"}), {});
    const std::vector<int> ports = server.ready_ports();
    REQUIRE(ports.size() == 4);
    drivers::BenchInstruments inst = drivers::open_bench_instruments(tcp_bench(ports), {});
    power_up_bench(inst);

    const std::vector<double> freqs{1e3, 1e6};
    // Source: ngspice `.ac` on the board as the server says it simulated it.
    const std::vector<double> truth = ngspice_gains(circuit::load_design(reveal), freqs);
    for (size_t k = 0; k < freqs.size(); ++k) {
        set_stimulus(inst, freqs[k], 5e-3);
        std::this_thread::sleep_for(std::chrono::milliseconds(60));  // 3 virtual s: settled
        const double measured = std::abs(capture_gain(inst, freqs[k]));
        INFO("f = " << freqs[k] << " Hz: measured " << measured << ", ngspice " << truth[k]);
        CHECK(truth[k] > 10);  // the preamp has gain at both frequencies
        CHECK(measured == Approx(truth[k]).epsilon(0.01));
    }
    inst.generator->set_output(false);
    inst.supply->output_off();
    inst = {};
    CHECK(server.wait(30, true) == 0);
}

TEST_CASE("two servers on port 0 run side by side and end cleanly on SIGTERM", "[sim][net]") {
    ampbench::testing::ChildProcess a(simulate_argv({"--seed", "1"}), {});
    ampbench::testing::ChildProcess b(simulate_argv({"--seed", "2"}), {});
    const std::vector<int> pa = a.ready_ports(), pb = b.ready_ports();
    REQUIRE(pa.size() == 4);
    REQUIRE(pb.size() == 4);
    for (int p : pa)
        for (int q : pb) CHECK(p != q);
    for (const auto* ports : {&pa, &pb}) {
        drivers::BenchInstruments inst = drivers::open_bench_instruments(tcp_bench(*ports), {});
        // Each server answers with its own seed in the serial field.
        const std::string serial = inst.generator->identify().serial;
        CHECK(serial == (ports == &pa ? "SIM-GEN-1" : "SIM-GEN-2"));
        CHECK(inst.meter->identify().manufacturer == "ampbench");
    }
    CHECK(a.wait(30, true) == 0);
    CHECK(b.wait(30, true) == 0);
}

// `ampbench simulate --design D [--bench B] [--seed S] [--fault REF:open|short] [--value REF:V]
// [--listen HOST:PORT] [--pty] [--time-scale K] [--reveal FILE] [--allow-remote]`: serves a
// virtual bench until SIGINT/SIGTERM.
#include <cstdint>
#include <fstream>
#include <ostream>

#include <CLI/CLI.hpp>
#include <fmt/format.h>

#include "cli/commands.h"
#include "core/bench_file.h"
#include "core/clock.h"
#include "core/errors.h"
#include "core/interrupt.h"
#include "drivers/sim/server.h"
#include "drivers/sim/virtual_bench.h"
#include "fit/circuit/design.h"

namespace ampbench::cli {
namespace {

struct SimulateArgs {
    std::string design, bench, listen = "127.0.0.1:0", reveal;
    std::uint64_t seed = 1;
    std::vector<std::string> faults, values;
    bool pty = false, allow_remote = false;
    double time_scale = 1.0;
};

int run_simulate(Context& ctx, const SimulateArgs& a) {
    const circuit::Design design = circuit::load_design(a.design);
    const BenchFile bench = a.bench.empty() ? default_virtual_bench("sim://") : load_bench_file(a.bench);
    sim::BoardSpec spec;
    spec.seed = a.seed;
    for (const auto& f : a.faults) sim::add_fault(spec, f);
    for (const auto& v : a.values) sim::add_value(spec, v);

    sim::ServeOptions opt;
    const size_t colon = a.listen.rfind(':');
    if (colon == std::string::npos) throw UsageError(fmt::format("--listen {}: expected HOST:PORT", a.listen));
    opt.host = a.listen.substr(0, colon);
    try {
        const unsigned long port = std::stoul(a.listen.substr(colon + 1));
        if (port > 65535) throw std::out_of_range("port");
        opt.port = static_cast<std::uint16_t>(port);
    } catch (const std::logic_error&) {
        throw UsageError(fmt::format("--listen {}: the port must be a number 0-65535", a.listen));
    }
    opt.pty = a.pty;
    opt.allow_remote = a.allow_remote;
    opt.time_scale = a.time_scale;
    if (!(a.time_scale > 0)) throw UsageError("--time-scale must be positive");

    ScaledClock clock(a.time_scale);
    sim::VirtualBench vb(design, bench, spec, clock);
    if (!a.reveal.empty()) {
        // Written before serving, so a client can compute the truth as soon as it sees "ready".
        const std::string tmp = a.reveal + ".partial";
        {
            std::ofstream out(tmp);
            out << vb.reveal();
            if (!out) throw InputError(a.reveal, "--reveal", "cannot write the file");
        }
        if (std::rename(tmp.c_str(), a.reveal.c_str()) != 0)
            throw InputError(a.reveal, "--reveal", "cannot write the file");
    }
    sim::BenchServer server(vb, opt);
    install_interrupt_handler();
    const auto ends = server.endpoints();
    ctx.out << (a.pty ? "ready-pty" : "ready");
    for (const auto& e : ends) ctx.out << ' ' << e;
    ctx.out << std::endl;
    server.run([] { return interrupt_requested(); });
    clear_interrupt();
    return 0;
}

}  // namespace

void add_simulate_command(CLI::App& app, Context& ctx) {
    auto args = std::make_shared<SimulateArgs>();
    CLI::App* cmd = app.add_subcommand("simulate",
                                       "Serve a virtual bench (generator, scope, meter, supply) that simulates a board");
    cmd->add_option("--design", args->design, "Board design file (*.design.json)")->required();
    cmd->add_option("--bench", args->bench, "Bench file: probe loading, generator output and meter routing");
    cmd->add_option("--seed", args->seed, "Seed of the drawn part values and the noise (default 1)");
    cmd->add_option("--fault", args->faults, "REF:open or REF:short (repeatable)");
    cmd->add_option("--value", args->values, "REF:VALUE, a part value to use instead of a drawn one (repeatable)");
    cmd->add_option("--listen", args->listen,
                    "HOST:PORT; generator on PORT, scope PORT+1, meter PORT+2, supply PORT+3 (PORT 0: any free)");
    cmd->add_flag("--pty", args->pty, "Serve on pseudo-terminals instead of TCP");
    cmd->add_option("--time-scale", args->time_scale, "Virtual seconds per wall second (default 1)");
    cmd->add_option("--reveal", args->reveal, "Write the board as simulated to FILE (ampbench-design/1)");
    cmd->add_flag("--allow-remote", args->allow_remote, "Listen on a non-loopback address");
    cmd->callback([&ctx, args] { ctx.action = [&ctx, args] { return run_simulate(ctx, *args); }; });
}

}  // namespace ampbench::cli

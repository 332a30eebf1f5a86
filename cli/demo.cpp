// `ampbench demo [--out DIR]`: measures a sample board and a faulted one on the in-process
// virtual bench, prints the gap tables and diagnosis, and writes both HTML reports.
#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <sstream>

#include <CLI/CLI.hpp>
#include <fmt/format.h>

#include "cli/commands.h"
#include "cli/procedures/sweep.h"
#include "cli/report/html_report.h"
#include "cli/report/terminal.h"
#include "core/errors.h"
#include "store/archive.h"

namespace ampbench::cli {
namespace {

namespace fs = std::filesystem;

struct DemoArgs {
    std::string out = "ampbench-demo";
    std::string samples;
    bool progress = true;
    int per_decade = 6;
    int tolerance_runs = 2000;
    std::optional<double> to_hz;  // default: a decade above the predicted f_high
};

fs::path find_samples(const std::string& given) {
    if (!given.empty()) return given;
    std::vector<fs::path> tries{"sample_sessions"};
    std::error_code ec;
    const fs::path exe = fs::read_symlink("/proc/self/exe", ec);
    if (!ec) {
        tries.push_back(exe.parent_path() / "../../sample_sessions");
        tries.push_back(exe.parent_path() / "../share/ampbench/sample_sessions");
    }
    for (const fs::path& p : tries)
        if (fs::exists(p / "pa1.design.json")) return p;
    throw InputError("sample_sessions", "", "cannot find the sample designs (run from the source tree or pass --samples DIR)");
}

std::string slurp(const fs::path& p) {
    std::ifstream f(p, std::ios::binary);
    if (!f) throw InputError(p.string(), "", "cannot read the file");
    std::ostringstream s;
    s << f.rdbuf();
    return s.str();
}

void write_file(const fs::path& p, const std::string& text) {
    std::ofstream f(p, std::ios::binary | std::ios::trunc);
    if (!f || !(f << text) || !f.flush()) throw InputError(p.string(), "", "cannot write the file");
}

// The sample bench with its sim:// query replaced (a different board draw or a planted fault).
std::string bench_with_query(std::string text, const std::string& query) {
    const std::string from = "sim://?seed=2611";
    for (size_t at = text.find(from); at != std::string::npos; at = text.find(from, at + query.size())) text.replace(at, from.size(), query);
    return text;
}

int run_demo(Context& ctx, const DemoArgs& a) {
    const fs::path samples = find_samples(a.samples);
    const fs::path out = a.out;
    fs::create_directories(out);
    const std::string bench_text = slurp(samples / "virtual.bench.json");
    const fs::path good_bench = out / "station-b2-board-0042.bench.json";
    const fs::path bad_bench = out / "station-b2-board-0043.bench.json";
    write_file(good_bench, bench_with_query(bench_text, "sim://?seed=2611"));
    write_file(bad_bench, bench_with_query(bench_text, "sim://?seed=2643&fault=C2:open"));
    auto archive = store::open_archive((out / "ampbench.sqlite").string());

    struct Board {
        std::string serial;
        fs::path bench;
        std::string what;
    };
    const std::vector<Board> boards{{"PA1-2611-0042", good_bench, "a board from lot LOT-2611-BC1"},
                                    {"PA1-2611-0043", bad_bench, "a board returned from test with low gain"}};
    std::vector<std::string> written;
    {
        // The station's scope is matched first, so the first board's sweep divides its channel
        // mismatch out (the second board sits on another virtual bench with its own scope).
        ctx.out << "\n== channel match of station B2's virtual scope (both probes on the generator output) ==\n";
        procedures::MatchOptions mo;
        mo.bench_path = good_bench.string();
        mo.operator_name = "demo";
        mo.assume_yes = true;
        mo.progress = a.progress;
        mo.plan.per_decade = 3;
        mo.plan.from_hz = 1.0;
        mo.plan.to_hz = std::max(20e6, a.to_hz.value_or(0.0));
        const procedures::MatchOutcome m = procedures::run_match(mo, *archive, ctx.out, ctx.err, std::cin);
        double worst_db = 0, worst_deg = 0;
        for (const auto& row : m.rows) worst_db = std::max(worst_db, std::abs(row.gain_db)), worst_deg = std::max(worst_deg, std::abs(row.phase_deg));
        ctx.out << fmt::format("match session {} · {} points · largest mismatch {:.3f} dB, {:.4f}°\n", m.session_id, m.rows.size(),
                               worst_db, worst_deg);
    }
    for (const Board& b : boards) {
        ctx.out << fmt::format("\n== HVE-PA1 {} ({}) on the virtual bench ==\n", b.serial, b.what);
        procedures::SweepOptions o;
        o.bench_path = b.bench.string();
        o.design_path = (samples / "pa1.design.json").string();
        o.board_serial = b.serial;
        o.operator_name = "demo";
        o.assume_yes = true;
        o.progress = a.progress;
        o.plan.per_decade = a.per_decade;
        o.tolerance_runs = a.tolerance_runs;
        o.plan.to_hz = a.to_hz;
        const procedures::SweepOutcome r = procedures::run_sweep(o, *archive, ctx.out, ctx.err, std::cin);
        ctx.out << fmt::format("session {} · {} points · {:.1f} s of virtual time\n{}{}\n\n", r.session_id, r.points,
                               r.virtual_s.value_or(0.0), report::readings_text(r.analysis), r.fit.brief());
        ctx.out << report::gap_table(r.gap);
        if (!r.diagnosis.empty()) ctx.out << "\n" << report::diagnosis_text(r.diagnosis);
        const fs::path html = out / fmt::format("{}.html", b.serial);
        write_file(html, report::html_report(archive->session_detail(r.session_id), r.analysis));
        written.push_back(html.string());
    }
    ctx.out << "\nArchive: " << (out / "ampbench.sqlite").string() << "\nReports:\n";
    for (const auto& w : written) ctx.out << "  " << w << "\n";
    return 0;
}

}  // namespace

void add_demo_command(CLI::App& app, Context& ctx) {
    auto args = std::make_shared<DemoArgs>();
    CLI::App* c = app.add_subcommand("demo", "Measure two sample boards on the virtual bench and write their reports");
    c->add_option("--out", args->out, "Directory for the archive and reports (default ./ampbench-demo)");
    c->add_option("--samples", args->samples, "Directory holding the sample designs (default: found beside the program)");
    c->add_option("--per-decade", args->per_decade, "Points per decade of the base plan (default 6)")->check(CLI::Range(2, 40));
    c->add_option("--to", args->to_hz, "Highest frequency of the plan, Hz (default a decade above the predicted f_high)");
    c->add_option("--tolerance-runs", args->tolerance_runs, "Monte Carlo draws for the tolerance band (default 2000)")
        ->check(CLI::Range(100, 100000));
    c->add_flag("--no-progress", [args](std::int64_t) { args->progress = false; }, "No progress bar");
    c->callback([&ctx, args] { ctx.action = [&ctx, args] { return run_demo(ctx, *args); }; });
}

}  // namespace ampbench::cli

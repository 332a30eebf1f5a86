// `ampbench demo` end to end: the good board is in band and fitted close to the board the
// virtual bench actually drew, the faulted board is diagnosed, and both HTML reports are complete.
#include <cmath>
#include <cstring>
#include <string>

#include <catch2/catch.hpp>

#include "cli_support.h"
#include "core/bench_file.h"
#include "drivers/sim/board.h"
#include "fit/circuit/design.h"
#include "fit/circuit/netlist.h"
#include "fit/circuit/predict.h"
#include "store/archive.h"

using namespace ampbench;
using namespace ampbench::cli::testing;

namespace {

size_t count_of(const std::string& text, const std::string& what) {
    size_t n = 0;
    for (size_t at = text.find(what); at != std::string::npos; at = text.find(what, at + what.size())) ++n;
    return n;
}

// The text of the <svg id="ID" ...>...</svg> element.
std::string svg_element(const std::string& html, const std::string& id) {
    const size_t from = html.find("<svg id=\"" + id + "\"");
    if (from == std::string::npos) return {};
    const size_t to = html.find("</svg>", from);
    return to == std::string::npos ? std::string() : html.substr(from, to - from);
}

// The verdict column of the gap-table row for `quantity` in one section of the demo's output.
std::string verdict_of(const std::string& section, const std::string& quantity) {
    const size_t at = section.find("\n" + quantity + " ");
    if (at == std::string::npos) return "(row missing)";
    const std::string line = section.substr(at + 1, section.find('\n', at + 1) - at - 1);
    for (const char* v : {"out of band", "in band", "inconclusive", "no band", "not measured"})
        if (line.size() >= std::strlen(v) && line.compare(line.size() - std::strlen(v), std::string::npos, v) == 0) return v;
    return "(no verdict)";
}

}  // namespace

TEST_CASE("the demo measures a good and a faulted HVE-PA1 and writes both reports", "[demo]") {
    CliTempDir dir;
    const std::string out_dir = dir.path("demo");
    // Fewer Monte Carlo draws than the default 2000 keep the sanitized build quick; the band's
    // 0.5 %/99.5 % points are still estimated from 400 draws.
    const CliResult r = run_cli({"demo", "--out", out_dir, "--samples", std::string(AMPBENCH_SOURCE_DIR) + "/sample_sessions",
                                 "--tolerance-runs", "400", "--no-progress"});
    INFO(r.out << r.err);
    REQUIRE(r.code == 0);

    const size_t second = r.out.find("== HVE-PA1 PA1-2611-0043");
    REQUIRE(second != std::string::npos);
    const std::string good = r.out.substr(0, second), bad = r.out.substr(second);

    // The seeded good board is a draw inside the design's tolerances: nothing out of band.
    CHECK(verdict_of(good, "midband_gain_db") == "in band");
    CHECK(verdict_of(good, "f_low_hz") != "out of band");
    CHECK(verdict_of(good, "f_high_hz") != "out of band");
    CHECK(good.find("out of band") == std::string::npos);
    CHECK(good.find("Diagnosis") == std::string::npos);

    // The planted fault is C2 (emitter bypass) open: gain collapses, the diagnosis names C2 first.
    CHECK(verdict_of(bad, "midband_gain_db") == "out of band");
    const size_t diag = bad.find("Diagnosis");
    REQUIRE(diag != std::string::npos);
    const size_t first = bad.find("\n  1. ", diag);
    REQUIRE(first != std::string::npos);
    const size_t name_at = first + 6;
    CHECK(bad.substr(name_at, bad.find(' ', name_at) - name_at) == "C2");

    // Where the reports are.
    CHECK(r.out.find(out_dir + "/PA1-2611-0042.html") != std::string::npos);
    CHECK(r.out.find(out_dir + "/PA1-2611-0043.html") != std::string::npos);

    // Session 1 is the channel match of the first station's scope; the first board's sweep
    // divides it out, the second board (another virtual bench, another scope) has none.
    CHECK(good.find("channel match: session 1,") != std::string::npos);
    CHECK(bad.find("channel match: none") != std::string::npos);
    auto archive = store::open_archive(out_dir + "/ampbench.sqlite");
    CHECK(archive->session_detail(1).session.kind == store::SessionKind::match);
    for (const auto& [session, serial] : {std::pair<std::int64_t, std::string>{2, "PA1-2611-0042"}, {3, "PA1-2611-0043"}}) {
        const store::SessionDetail d = archive->session_detail(session);
        CHECK(d.session.board_serial == serial);
        size_t current = 0;
        for (const auto& p : d.points) current += p.superseded_by ? 0 : 1;
        CHECK(current >= 20);
        const std::string html = read_text(out_dir + "/" + serial + ".html");
        const std::string gain = svg_element(html, "gain-plot"), phase = svg_element(html, "phase-plot");
        REQUIRE_FALSE(gain.empty());
        REQUIRE_FALSE(phase.empty());
        CHECK(count_of(gain, "class=\"measured-point\"") == current);
        CHECK(count_of(phase, "class=\"measured-point\"") == current);
        CHECK(html.find("id=\"gap-table\"") != std::string::npos);
        CHECK(html.find("<script") == std::string::npos);
    }

    // The fit of the good board against the board the virtual bench drew (seed 2611), predicted
    // by the circuit engine with the same bench loading: the measurement finds the real board.
    const circuit::Design nominal = circuit::load_design(std::string(AMPBENCH_SOURCE_DIR) + "/sample_sessions/pa1.design.json");
    const BenchFile bench = load_bench_file(out_dir + "/station-b2-board-0042.bench.json");
    const circuit::Design drawn = sim::draw_board(nominal, sim::parse_board_spec("sim://?seed=2611"));
    const circuit::Prediction truth = circuit::predict(circuit::build_netlist(drawn, circuit::bench_loading(bench)));
    const store::SessionDetail d = archive->session_detail(2);
    const store::FitRecord* fit = nullptr;
    for (const auto& f : d.fits)
        if (f.kind == "response") fit = &f;
    REQUIRE(fit);
    REQUIRE(fit->midband_gain_db);
    REQUIRE(fit->f_low_hz);
    REQUIRE(truth.response.f_low_hz);
    REQUIRE(truth.response.f_high_hz);
    INFO("fitted " << *fit->midband_gain_db << " dB, " << *fit->f_low_hz << " Hz, " << fit->f_high_hz.value_or(0.0) << " Hz; drawn board "
                   << truth.response.midband_gain_db << " dB, " << *truth.response.f_low_hz << " Hz, " << *truth.response.f_high_hz << " Hz");
    CHECK(*fit->midband_gain_db == Approx(truth.response.midband_gain_db).margin(0.2));
    CHECK(*fit->f_low_hz == Approx(*truth.response.f_low_hz).epsilon(0.03));
    // The demo's plan stops at 150 kHz (see `ampbench demo --help`), below f_high of about 1.9 MHz.
    if (fit->f_high_hz) CHECK(*fit->f_high_hz == Approx(*truth.response.f_high_hz).epsilon(0.03));
}

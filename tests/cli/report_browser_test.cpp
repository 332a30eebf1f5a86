// The HTML report as a browser sees it: Debian's headless Chromium loads the file and dumps the
// DOM it built; the plots, the gap table and an unfriendly board serial are checked there.
#include <sys/wait.h>

#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <string>

#include <catch2/catch.hpp>

#include "cli_support.h"
#include "store/archive.h"

using namespace ampbench;
using namespace ampbench::cli::testing;

namespace {

constexpr const char* kChromium = "/usr/bin/chromium";

size_t count_of(const std::string& text, const std::string& what) {
    size_t n = 0;
    for (size_t at = text.find(what); at != std::string::npos; at = text.find(what, at + what.size())) ++n;
    return n;
}

// The serialised <svg id="ID" ...>...</svg> element of a dumped DOM.
std::string svg_element(const std::string& dom, const std::string& id) {
    const size_t from = dom.find("<svg id=\"" + id + "\"");
    if (from == std::string::npos) return {};
    const size_t to = dom.find("</svg>", from);
    return to == std::string::npos ? std::string() : dom.substr(from, to - from);
}

// The text between the opening tag carrying `attr` and the next "</tag>".
std::string element_text(const std::string& dom, const std::string& attr, const std::string& tag) {
    const size_t at = dom.find(attr);
    if (at == std::string::npos) return {};
    const size_t open_end = dom.find('>', at);
    const size_t close = dom.find("</" + tag + ">", open_end);
    if (open_end == std::string::npos || close == std::string::npos) return {};
    return dom.substr(open_end + 1, close - open_end - 1);
}

// `chromium --headless --dump-dom` of a file; the DOM on stdout (stderr to a log beside it).
// `timeout` ends a browser that hangs, so the test fails instead of stalling CI.
std::string dump_dom(const std::string& html_path) {
    const std::string log = html_path + ".chromium.log";
    const std::string cmd = std::string("timeout 60 ") + kChromium +
                            " --headless --no-sandbox --disable-gpu --no-first-run --user-data-dir='" + html_path +
                            ".profile' --dump-dom 'file://" + html_path + "' 2>'" + log + "'";
    std::string dom;
    FILE* p = ::popen(cmd.c_str(), "r");
    REQUIRE(p != nullptr);
    char buf[4096];
    for (size_t n; (n = std::fread(buf, 1, sizeof buf, p)) > 0;) dom.append(buf, n);
    const int status = ::pclose(p);
    INFO("chromium stderr: " << read_text(log).substr(0, 2000));
    REQUIRE(WIFEXITED(status));
    REQUIRE(WEXITSTATUS(status) == 0);
    return dom;
}

}  // namespace

TEST_CASE("the HTML report renders in headless Chromium with both plots and the gap table and escaped text", "[browser][report]") {
    if (!std::filesystem::exists(kChromium)) {
        WARN("SKIPPED: " << kChromium << " is not installed (Debian package chromium); the browser check did not run");
        return;
    }
    CliTempDir dir;
    // A serial that would run as a script if the report pasted it in unescaped.
    const std::string serial = "PA1-2611-<script>document.title='owned'</script>&0044";
    const CliResult sweep = run_cli({"--db", dir.db(), "sweep", "--bench", std::string(AMPBENCH_SOURCE_DIR) + "/sample_sessions/virtual.bench.json",
                                     "--design", std::string(AMPBENCH_SOURCE_DIR) + "/sample_sessions/pa1.design.json", "--board", serial,
                                     "--yes", "--no-progress", "--per-decade", "3", "--from", "5", "--to", "150e3", "--tolerance-runs",
                                     "100"});
    INFO(sweep.out << sweep.err);
    REQUIRE(sweep.code == 0);
    const std::string html = dir.path("report.html");
    const CliResult report = run_cli({"--db", dir.db(), "report", "1", "--html", html});
    INFO(report.out << report.err);
    REQUIRE(report.code == 0);

    size_t current = 0;
    {
        auto archive = store::open_archive(dir.db());
        for (const auto& p : archive->session_detail(1).points) current += p.superseded_by ? 0 : 1;
    }
    REQUIRE(current >= 10);

    const std::string dom = dump_dom(html);
    INFO("DOM: " << dom.substr(0, 3000));
    REQUIRE(dom.find("</html>") != std::string::npos);
    // Both Bode plots, each with one marker per current (not superseded) point.
    const std::string gain = svg_element(dom, "gain-plot"), phase = svg_element(dom, "phase-plot");
    REQUIRE_FALSE(gain.empty());
    REQUIRE_FALSE(phase.empty());
    CHECK(count_of(gain, "class=\"measured-point\"") == current);
    CHECK(count_of(phase, "class=\"measured-point\"") == current);
    // The gap table with its header and one row per quantity at least for gain and corners.
    const std::string gap = element_text(dom, "id=\"gap-table\"", "table");
    REQUIRE_FALSE(gap.empty());
    CHECK(gap.find("midband_gain_db") != std::string::npos);
    CHECK(gap.find("f_low_hz") != std::string::npos);
    CHECK(gap.find("verdict") != std::string::npos);
    // The serial is text: the browser made no script element of it and serialises it escaped.
    CHECK(dom.find("<script") == std::string::npos);
    CHECK(element_text(dom, "id=\"board-serial\"", "span") == "PA1-2611-&lt;script&gt;document.title='owned'&lt;/script&gt;&amp;0044");
    CHECK(element_text(dom, "<title", "title").find("&lt;script&gt;") != std::string::npos);
}

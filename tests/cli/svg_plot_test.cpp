// Tests for the inline-SVG plot renderer and HTML escaping used by the reports.
#include <catch2/catch.hpp>

#include <cmath>
#include <regex>
#include <string>

#include "cli/report/svg_plot.h"

using namespace ampbench::report;
using Catch::Matchers::Contains;

namespace {
size_t count(const std::string& s, const std::string& needle) {
    size_t n = 0;
    for (size_t p = s.find(needle); p != std::string::npos; p = s.find(needle, p + 1)) ++n;
    return n;
}
}  // namespace

TEST_CASE("HTML escaping", "[cli][report]") {
    CHECK(html_escape("<script>alert('x')</script> & \"q\"") ==
          "&lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt; &amp; &quot;q&quot;");
    CHECK(html_escape("PA1-2611-0042") == "PA1-2611-0042");
}

TEST_CASE("ticks", "[cli][report]") {
    CHECK(log_decade_ticks(5, 2e4) == std::vector<double>{10, 100, 1000, 10000});
    const auto t = linear_ticks(-3.2, 21.7, 6);
    REQUIRE(t.size() >= 4);
    CHECK(t.front() >= -3.2);
    CHECK(t.back() <= 21.7);
    CHECK(t[1] - t[0] == Approx(5.0));
}

TEST_CASE("a plot has one circle per measured point and maps frequency logarithmically",
          "[cli][report]") {
    Plot p;
    p.id = "gain-plot";
    p.title = "Gain <b>";
    p.y_label = "gain (dB)";
    for (int i = 0; i <= 30; ++i) {
        const double f = 10 * std::pow(10.0, i / 6.0);
        p.measured.push_back({f, 20 - 0.1 * i, 0.05});
    }
    PlotCurve fit{"fit", {{10, 20}, {1e6, 17}}, false, "fit"};
    p.curves.push_back(fit);
    p.band = PlotBand{"band", {10, 1e6}, {19, 16}, {21, 18}};
    p.markers.push_back({1000, "f_high <1 kHz>"});
    const std::string svg = render_svg(p);
    CHECK(count(svg, "class=\"measured-point\"") == 31);
    CHECK(count(svg, "class=\"error-bar\"") == 31);
    CHECK_THAT(svg, Contains("Gain &lt;b&gt;") && Contains("f_high &lt;1 kHz&gt;"));
    CHECK(svg.find("<b>") == std::string::npos);

    // Points one decade apart are equally spaced in x.
    std::regex cx("cx=\"([0-9.]+)\"");
    std::vector<double> xs;
    for (auto it = std::sregex_iterator(svg.begin(), svg.end(), cx); it != std::sregex_iterator();
         ++it)
        xs.push_back(std::stod((*it)[1]));
    REQUIRE(xs.size() == 31);
    CHECK(xs[12] - xs[6] == Approx(xs[6] - xs[0]).margin(0.2));
}

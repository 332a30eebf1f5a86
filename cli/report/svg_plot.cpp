// SVG rendering of Bode-style plots; geometry in one place (the Frame) so every element maps
// data to pixels the same way.
#include "cli/report/svg_plot.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include <fmt/format.h>

#include "core/value.h"

namespace ampbench::report {

std::string html_escape(std::string_view text) {
    std::string out;
    out.reserve(text.size());
    for (char c : text) {
        switch (c) {
            case '&': out += "&amp;"; break;
            case '<': out += "&lt;"; break;
            case '>': out += "&gt;"; break;
            case '"': out += "&quot;"; break;
            case '\'': out += "&#39;"; break;
            default: out += c;
        }
    }
    return out;
}

std::vector<double> log_decade_ticks(double lo, double hi) {
    std::vector<double> ticks;
    if (!(lo > 0) || !(hi > lo)) return ticks;
    for (int e = static_cast<int>(std::ceil(std::log10(lo) - 1e-9));
         e <= static_cast<int>(std::floor(std::log10(hi) + 1e-9)); ++e)
        ticks.push_back(std::pow(10.0, e));
    return ticks;
}

std::vector<double> linear_ticks(double lo, double hi, int target) {
    std::vector<double> ticks;
    if (!(hi > lo) || target < 2) return ticks;
    const double raw = (hi - lo) / target;
    const double mag = std::pow(10.0, std::floor(std::log10(raw)));
    double step = mag;
    for (double m : {1.0, 2.0, 5.0, 10.0}) {
        step = m * mag;
        if (step >= raw) break;
    }
    for (double t = std::ceil(lo / step) * step; t <= hi + step * 1e-9; t += step)
        ticks.push_back(std::fabs(t) < step * 1e-9 ? 0.0 : t);
    return ticks;
}

namespace {

struct Frame {
    double left = 64, right = 16, top = 34, bottom = 44;
    double width = 0, height = 0;
    double lx0 = 0, lx1 = 1, y0 = 0, y1 = 1;  // log10 x range and y range

    double px(double x) const {
        return left + (std::log10(x) - lx0) / (lx1 - lx0) * (width - left - right);
    }
    double py(double y) const {
        return top + (y1 - y) / (y1 - y0) * (height - top - bottom);
    }
};

void widen(double& lo, double& hi, double v) {
    if (!std::isfinite(v)) return;
    lo = std::min(lo, v);
    hi = std::max(hi, v);
}

std::string polyline(const Frame& f, const std::vector<PlotPoint>& pts) {
    std::string d;
    for (const auto& p : pts) {
        if (!(p.x > 0) || !std::isfinite(p.y)) continue;
        d += fmt::format("{}{:.1f},{:.1f}", d.empty() ? "M" : " L", f.px(p.x), f.py(p.y));
    }
    return d;
}

}  // namespace

std::string render_svg(const Plot& plot) {
    Frame f;
    f.width = plot.width_px;
    f.height = plot.height_px;
    double xlo = std::numeric_limits<double>::infinity(), xhi = -xlo;
    double ylo = xlo, yhi = -xlo;
    auto take = [&](double x, double y) {
        if (x > 0) widen(xlo, xhi, x);
        widen(ylo, yhi, y);
    };
    for (const auto& p : plot.measured) {
        take(p.x, p.y - p.y_err);
        take(p.x, p.y + p.y_err);
    }
    for (const auto& c : plot.curves)
        for (const auto& p : c.points) take(p.x, p.y);
    if (plot.band)
        for (size_t i = 0; i < plot.band->x.size(); ++i) {
            take(plot.band->x[i], plot.band->low[i]);
            take(plot.band->x[i], plot.band->high[i]);
        }
    if (!(xhi > xlo)) {
        xlo = 10;
        xhi = 1e6;
    }
    if (!(yhi > ylo)) {
        ylo = std::isfinite(ylo) ? ylo - 1 : -1;
        yhi = ylo + 2;
    }
    const double ypad = 0.06 * (yhi - ylo);
    f.lx0 = std::log10(xlo);
    f.lx1 = std::log10(xhi);
    if (f.lx1 - f.lx0 < 1e-6) {
        f.lx0 -= 0.5;
        f.lx1 += 0.5;
    }
    f.y0 = ylo - ypad;
    f.y1 = yhi + ypad;

    std::string s = fmt::format(
        "<svg id=\"{}\" class=\"plot\" xmlns=\"http://www.w3.org/2000/svg\" width=\"{}\" "
        "height=\"{}\" viewBox=\"0 0 {} {}\" role=\"img\" aria-label=\"{}\">\n",
        html_escape(plot.id), plot.width_px, plot.height_px, plot.width_px, plot.height_px,
        html_escape(plot.title));
    s += fmt::format("<text class=\"plot-title\" x=\"{}\" y=\"20\">{}</text>\n", f.left,
                     html_escape(plot.title));
    const double x_end = f.width - f.right, y_end = f.height - f.bottom;
    s += fmt::format(
        "<rect class=\"plot-area\" x=\"{:.1f}\" y=\"{:.1f}\" width=\"{:.1f}\" height=\"{:.1f}\"/>\n",
        f.left, f.top, x_end - f.left, y_end - f.top);

    // Grid and tick labels.
    for (double t : log_decade_ticks(std::pow(10.0, f.lx0), std::pow(10.0, f.lx1))) {
        const double x = f.px(t);
        s += fmt::format("<line class=\"grid\" x1=\"{0:.1f}\" y1=\"{1:.1f}\" x2=\"{0:.1f}\" "
                         "y2=\"{2:.1f}\"/>\n<text class=\"tick\" x=\"{0:.1f}\" y=\"{3:.1f}\" "
                         "text-anchor=\"middle\">{4}</text>\n",
                         x, f.top, y_end, y_end + 16, format_eng(t, "Hz", 3));
    }
    for (double t : linear_ticks(f.y0, f.y1)) {
        const double y = f.py(t);
        s += fmt::format("<line class=\"grid\" x1=\"{1:.1f}\" y1=\"{0:.1f}\" x2=\"{2:.1f}\" "
                         "y2=\"{0:.1f}\"/>\n<text class=\"tick\" x=\"{3:.1f}\" y=\"{4:.1f}\" "
                         "text-anchor=\"end\">{5:g}</text>\n",
                         y, f.left, x_end, f.left - 6, y + 4, t);
    }
    s += fmt::format("<text class=\"axis-label\" x=\"{:.1f}\" y=\"{:.1f}\" "
                     "text-anchor=\"middle\">frequency</text>\n",
                     (f.left + x_end) / 2, f.height - 6);
    s += fmt::format("<text class=\"axis-label\" transform=\"translate(14 {:.1f}) rotate(-90)\" "
                     "text-anchor=\"middle\">{}</text>\n",
                     (f.top + y_end) / 2, html_escape(plot.y_label));

    if (plot.band && !plot.band->x.empty()) {
        std::string d;
        const auto& b = *plot.band;
        for (size_t i = 0; i < b.x.size(); ++i)
            d += fmt::format("{}{:.1f},{:.1f}", i ? " L" : "M", f.px(b.x[i]), f.py(b.high[i]));
        for (size_t i = b.x.size(); i-- > 0;)
            d += fmt::format(" L{:.1f},{:.1f}", f.px(b.x[i]), f.py(b.low[i]));
        s += fmt::format("<path class=\"band\" d=\"{} Z\"><title>{}</title></path>\n", d,
                         html_escape(b.label));
    }
    for (const auto& c : plot.curves) {
        const std::string d = polyline(f, c.points);
        if (d.empty()) continue;
        s += fmt::format("<path class=\"curve {}\"{} d=\"{}\"><title>{}</title></path>\n",
                         html_escape(c.css_class), c.dashed ? " stroke-dasharray=\"6 4\"" : "", d,
                         html_escape(c.label));
    }
    for (const auto& m : plot.markers) {
        if (!(m.x > 0)) continue;
        const double x = f.px(m.x);
        s += fmt::format("<line class=\"marker\" x1=\"{0:.1f}\" y1=\"{1:.1f}\" x2=\"{0:.1f}\" "
                         "y2=\"{2:.1f}\"/>\n<text class=\"marker-label\" x=\"{3:.1f}\" "
                         "y=\"{4:.1f}\">{5}</text>\n",
                         x, f.top, y_end, x + 4, f.top + 12, html_escape(m.label));
    }
    for (const auto& p : plot.measured) {
        if (!(p.x > 0) || !std::isfinite(p.y)) continue;
        const double x = f.px(p.x);
        if (p.y_err > 0)
            s += fmt::format("<line class=\"error-bar\" x1=\"{0:.1f}\" y1=\"{1:.1f}\" "
                             "x2=\"{0:.1f}\" y2=\"{2:.1f}\"/>\n",
                             x, f.py(p.y - p.y_err), f.py(p.y + p.y_err));
        s += fmt::format("<circle class=\"measured-point\" cx=\"{:.1f}\" cy=\"{:.1f}\" r=\"3\">"
                         "<title>{} {:.4g}</title></circle>\n",
                         x, f.py(p.y), format_eng(p.x, "Hz", 4), p.y);
    }
    s += "</svg>\n";
    return s;
}

}  // namespace ampbench::report

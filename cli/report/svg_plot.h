// Inline-SVG plots for the self-contained HTML reports: log-frequency axes, measured points with
// error bars, curves, a shaded band and marked frequencies. No scripts, fonts or images.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace ampbench::report {

// Escapes text for HTML element content and attribute values.
std::string html_escape(std::string_view text);

struct PlotPoint {
    double x = 0;        // frequency, Hz (plotted on a log axis)
    double y = 0;
    double y_err = 0;    // half-width of the error bar; 0 draws none
};

struct PlotCurve {
    std::string label;
    std::vector<PlotPoint> points;  // y_err ignored
    bool dashed = false;
    std::string css_class;          // "fit", "predicted", ...
};

struct PlotBand {
    std::string label;
    std::vector<double> x, low, high;
};

struct PlotMarker {
    double x = 0;
    std::string label;  // e.g. "f_low 42.1 Hz"
};

struct Plot {
    std::string id;       // element id, e.g. "gain-plot"
    std::string title;
    std::string y_label;  // e.g. "gain (dB)"
    std::vector<PlotPoint> measured;
    std::string measured_label = "measured";
    std::vector<PlotCurve> curves;
    std::optional<PlotBand> band;
    std::vector<PlotMarker> markers;
    int width_px = 760;
    int height_px = 320;
};

// One <svg> element. Measured points are <circle class="measured-point">, one per point.
std::string render_svg(const Plot& plot);

// Tick positions for a log axis spanning [lo, hi]: the decades (1, 10, 100, ...) inside it.
std::vector<double> log_decade_ticks(double lo, double hi);
// "Nice" linear ticks (1-2-5 steps), about `target` of them, covering [lo, hi].
std::vector<double> linear_ticks(double lo, double hi, int target = 6);

}  // namespace ampbench::report

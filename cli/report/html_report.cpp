// One HTML file with everything inline: no scripts, fonts or images.
#include "cli/report/html_report.h"

#include <algorithm>
#include <cmath>
#include <complex>
#include <numbers>

#include <fmt/format.h>

#include "cli/procedures/power.h"
#include "cli/report/svg_plot.h"
#include "cli/report/terminal.h"
#include "core/bench_file.h"
#include "core/errors.h"
#include "core/value.h"
#include "core/version.h"
#include "fit/circuit/ac.h"
#include "fit/circuit/dc.h"
#include "fit/circuit/design.h"
#include "fit/circuit/netlist.h"
#include "fit/circuit/tolerance.h"

namespace ampbench::report {
namespace {

constexpr double kDeg = 180.0 / std::numbers::pi;

struct Curves {
    std::vector<double> f;
    std::vector<double> pred_db, pred_deg;
    std::vector<double> lo_db, hi_db, lo_deg, hi_deg;
};

// The predicted curve and a pointwise tolerance band (p0.5..p99.5 of a Monte Carlo at each frequency).
Curves predicted_curves(const circuit::Design& design, const circuit::BenchLoading& loading, double f_lo, double f_hi) {
    Curves c;
    c.f = circuit::log_frequencies(f_lo, f_hi, 80);
    circuit::Netlist nl = circuit::build_netlist(design, loading);
    const circuit::OperatingPoint op = circuit::solve_operating_point(nl);
    circuit::AcAnalysis ac(nl, op);
    for (double f : c.f) {
        const auto h = ac.gain(f);
        c.pred_db.push_back(20 * std::log10(std::abs(h)));
        c.pred_deg.push_back(std::arg(h) * kDeg);
    }
    const int runs = 200;
    std::vector<std::vector<double>> db(c.f.size()), deg(c.f.size());
    for (const circuit::PartValues& v : circuit::draw_part_values(design, 1, runs)) {
        try {
            circuit::apply_values(v, nl);
            const circuit::OperatingPoint o = circuit::solve_operating_point(nl, {}, &op.x);
            ac.update(nl, o);
            for (size_t i = 0; i < c.f.size(); ++i) {
                const auto h = ac.gain(c.f[i]);
                db[i].push_back(20 * std::log10(std::abs(h)));
                double d = std::arg(h) * kDeg;
                d = c.pred_deg[i] + std::remainder(d - c.pred_deg[i], 360.0);
                deg[i].push_back(d);
            }
        } catch (const Error&) {
        }
    }
    auto pct = [](std::vector<double> v, double p) {
        if (v.empty()) return 0.0;
        std::sort(v.begin(), v.end());
        return v[static_cast<size_t>(std::clamp(p * static_cast<double>(v.size() - 1), 0.0, static_cast<double>(v.size() - 1)))];
    };
    for (size_t i = 0; i < c.f.size(); ++i) {
        c.lo_db.push_back(pct(db[i], 0.005));
        c.hi_db.push_back(pct(db[i], 0.995));
        c.lo_deg.push_back(pct(deg[i], 0.005));
        c.hi_deg.push_back(pct(deg[i], 0.995));
    }
    return c;
}

std::string esc(const std::string& s) { return html_escape(s); }

}  // namespace

std::string html_report(const store::SessionDetail& d, const procedures::SessionAnalysis& a) {
    std::vector<const store::Point*> pts;
    std::vector<const store::Point*> superseded;
    for (const store::Point& p : d.points) (p.superseded_by ? superseded : pts).push_back(&p);
    std::sort(pts.begin(), pts.end(), [](auto* l, auto* r) { return l->freq_hz < r->freq_hz; });
    double f_lo = 1, f_hi = 1e6;
    if (!pts.empty()) f_lo = pts.front()->freq_hz, f_hi = pts.back()->freq_hz;

    Plot gain, phase;
    gain.id = "gain-plot";
    gain.title = "Gain";
    gain.y_label = "gain (dB)";
    phase.id = "phase-plot";
    phase.title = "Phase";
    phase.y_label = "phase (°)";
    for (const store::Point* p : pts) {
        gain.measured.push_back({p->freq_hz, p->gain_db, 2 * p->gain_db_sd.value_or(0.0)});
        phase.measured.push_back({p->freq_hz, p->phase_deg.value_or(0.0), 2 * p->phase_deg_sd.value_or(0.0)});
    }
    std::string design_name;
    if (a.fit.usable()) {
        PlotCurve fg{"fit " + a.fit.model_name(), {}, false, "fit"}, fp{"fit", {}, false, "fit"};
        double prev = 0;
        bool first = true;
        for (double f : circuit::log_frequencies(f_lo, f_hi, 120)) {
            const auto h = a.fit.response(f);
            fg.points.push_back({f, 20 * std::log10(std::abs(h)), 0});
            double deg = std::arg(h) * kDeg;
            if (!first) deg = prev + std::remainder(deg - prev, 360.0);
            first = false;
            prev = deg;
            fp.points.push_back({f, deg, 0});
        }
        gain.curves.push_back(fg);
        phase.curves.push_back(fp);
        if (a.fit.f_low_hz.present) {
            gain.markers.push_back({a.fit.f_low_hz.value, "f_low " + format_eng(a.fit.f_low_hz.value, "Hz", 4)});
            phase.markers.push_back(gain.markers.back());
        }
        if (a.fit.f_high_hz.present) {
            gain.markers.push_back({a.fit.f_high_hz.value, "f_high " + format_eng(a.fit.f_high_hz.value, "Hz", 4)});
            phase.markers.push_back(gain.markers.back());
        }
    }
    if (!a.predicted_design_json.empty()) {
        const circuit::Design design = circuit::parse_design(a.predicted_design_json, "session design");
        const Curves c = predicted_curves(design, a.loading, f_lo, f_hi);
        PlotCurve pg{"predicted (with bench)", {}, true, "predicted"}, pp{"predicted (with bench)", {}, true, "predicted"};
        // Measured phase is wrapped into (−180, 180]; bring the predicted curve to the same branch.
        const double shift = pts.empty() ? 0.0 : [&] {
            const store::Point* mid = pts[pts.size() / 2];
            const size_t k = static_cast<size_t>(std::lower_bound(c.f.begin(), c.f.end(), mid->freq_hz) - c.f.begin());
            const double model = c.pred_deg[std::min(k, c.f.size() - 1)];
            return std::round((mid->phase_deg.value_or(0.0) - model) / 360.0) * 360.0;
        }();
        PlotBand bg{"tolerance band", c.f, c.lo_db, c.hi_db}, bp{"tolerance band", c.f, {}, {}};
        for (size_t i = 0; i < c.f.size(); ++i) {
            pg.points.push_back({c.f[i], c.pred_db[i], 0});
            pp.points.push_back({c.f[i], c.pred_deg[i] + shift, 0});
            bp.low.push_back(c.lo_deg[i] + shift);
            bp.high.push_back(c.hi_deg[i] + shift);
        }
        gain.curves.push_back(pg);
        phase.curves.push_back(pp);
        gain.band = bg;
        phase.band = bp;
        design_name = design.name;
    }

    std::string h;
    h += "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\n";
    h += fmt::format("<title>ampbench report: board {}</title>\n", esc(d.session.board_serial));
    h += "<style>\nbody{font-family:system-ui,sans-serif;margin:2em auto;max-width:60em;color:#1d2a33;background:#fbfaf7}"
         "h1{font-size:1.5em;border-bottom:3px solid #2f6f73}h2{font-size:1.15em;color:#2f6f73;margin-top:1.6em}"
         "table{border-collapse:collapse;margin:.5em 0}td,th{border:1px solid #c9d3d6;padding:.25em .6em;text-align:left}"
         "th{background:#e6eeee}.verdict-out{color:#a12a1f;font-weight:bold}.verdict-in{color:#2b6b2f}"
         ".verdict-inconclusive{color:#8a6d00}.notice{background:#fff6e0;border-left:4px solid #d9a400;padding:.5em 1em}"
         "pre{white-space:pre-wrap}\n</style></head><body>\n";
    h += fmt::format("<h1>Board <span id=\"board-serial\">{}</span></h1>\n", esc(d.session.board_serial));
    h += "<table id=\"session\">";
    auto row = [&](const std::string& k, const std::string& v) { h += "<tr><th>" + esc(k) + "</th><td>" + esc(v) + "</td></tr>"; };
    row("session", fmt::format("{} ({})", d.session.id, d.session.uuid));
    row("design", design_name);
    row("operator", d.session.operator_name);
    row("started", d.session.started_utc);
    row("finished", d.session.finished_utc);
    row("status", store::to_string(d.session.status));
    row("bench file", d.session.bench_file);
    row("software", "ampbench " + d.session.software_version + " (report by " + software_version() + ")");
    row("channel match", "none: the bench's systematic terms (gain accuracy, skew) are in the uncertainties");
    h += "</table>\n";

    h += "<h2>Bode plots</h2>\n<p>Measured points with 95 % error bars, the fitted curve, the predicted curve (including the "
         "generator's output resistance and each probe's loading) and the shaded tolerance band.</p>\n";
    h += render_svg(gain) + "\n" + render_svg(phase) + "\n";

    h += "<h2>Gap to the design</h2>\n<table id=\"gap-table\"><tr><th>quantity</th><th>predicted</th><th>tolerance band</th>"
         "<th>measured ± U</th><th>gap</th><th>verdict</th></tr>\n";
    for (const extract::GapRow& r : a.gap) {
        const std::string cls = r.verdict == extract::kOutOfBand ? "verdict-out"
                                : r.verdict == extract::kInBand  ? "verdict-in"
                                                                 : "verdict-inconclusive";
        h += fmt::format("<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td class=\"{}\">{}</td></tr>\n", esc(r.quantity),
                         esc(quantity_text(r.predicted, r.unit)),
                         esc((r.band_low && r.band_high) ? quantity_text(*r.band_low, r.unit) + " … " + quantity_text(*r.band_high, r.unit) : "—"),
                         esc(r.measured ? quantity_text(*r.measured, r.unit) + " ± " + quantity_text(r.coverage_k * r.u, r.unit) : "—"),
                         esc(r.measured ? quantity_text(r.gap, r.unit) : "—"), cls, esc(r.verdict));
    }
    h += "</table>\n<p>U = 2u (95 %). Verdicts by guarded acceptance (JCGM 106:2012).</p>\n";
    h += "<h2>Diagnosis</h2>\n";
    if (a.diagnosis.empty()) {
        h += "<p id=\"diagnosis\">Nothing is out of band; no diagnosis was needed.</p>\n";
    } else {
        h += "<ol id=\"diagnosis\">";
        for (const auto& c : a.diagnosis) h += fmt::format("<li>{} — fit quality (reduced χ²) {:.3g}</li>", esc(c.change), c.score);
        h += "</ol>\n";
    }
    h += "<h2>Fit</h2>\n<p>" + esc(a.fit.brief()) + "</p>\n";
    h += "<h2>Readings and channel match</h2>\n<pre id=\"readings\">" + esc(readings_text(a)) + "</pre>\n";
    h += "<h2>DC readings</h2>\n<table id=\"dc\"><tr><th>node</th><th>meter channel</th><th>measured</th><th>predicted</th></tr>";
    for (const auto& dc : a.dc)
        h += fmt::format("<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>", esc(dc.node), esc(dc.channel),
                         esc(format_eng(dc.volts, "V")), esc(format_eng(dc.predicted_v, "V")));
    h += fmt::format("<tr><td>supply current</td><td>supply</td><td>{}</td><td>{}</td></tr></table>\n",
                     esc(format_eng(a.quiescent_a, "A")), esc(format_eng(a.prediction.op.supply_current_a, "A")));
    h += "<h2>Instruments and probes</h2>\n<table id=\"instruments\"><tr><th>role</th><th>identity</th><th>asset</th><th>address</th>"
         "<th>calibration due</th><th>certificate</th></tr>";
    for (const auto& i : d.instruments)
        h += fmt::format("<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>", esc(i.role), esc(i.identity),
                         esc(i.asset), esc(i.uri), esc(i.cal_due.empty() ? "not stated" : i.cal_due), esc(i.certificate));
    for (const auto& p : d.probes)
        h += fmt::format("<tr><td>probe {} (channel {})</td><td>×{}</td><td>{}</td><td></td><td>{}</td><td>{}</td></tr>", esc(p.name),
                         esc(p.channel), p.ratio, esc(p.asset), esc(p.cal_due.empty() ? "not stated" : p.cal_due), esc(p.certificate));
    h += "</table>\n";
    if (!superseded.empty())
        h += fmt::format("<p>{} reading(s) were retaken (clipped or distorted); the superseded readings are kept in the archive.</p>\n",
                         superseded.size());
    h += "<h2>Safety</h2>\n<pre class=\"notice\">" + esc(procedures::safety_notice(a.current_limit_a)) + "</pre>\n";
    h += "</body></html>\n";
    return h;
}

}  // namespace ampbench::report

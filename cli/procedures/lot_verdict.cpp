// Lot verdict, statistics, OC curve and the HTML report (inline SVG, no scripts, all text escaped).
#include "cli/procedures/lot_verdict.h"

#include <algorithm>
#include <cmath>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "cli/procedures/lot_inspection.h"
#include "cli/report/svg_plot.h"
#include "core/value.h"

namespace ampbench::procedures {
namespace {

using ordered_json = nlohmann::ordered_json;

QuantityStats stats_of(const std::string& name, const std::vector<double>& values, const lot::LotPlan& plan) {
    QuantityStats q;
    q.name = name;
    if (auto it = plan.spec.find(name); it != plan.spec.end()) q.limits = it->second;
    std::vector<double> finite;
    for (double v : values)
        if (std::isfinite(v)) finite.push_back(v);
    if (finite.empty()) return q;
    q.summary = lot::summarize(finite);
    q.cpk = lot::cpk(*q.summary, q.limits.min, q.limits.max);
    return q;
}

ordered_json opt(const std::optional<double>& v) { return v ? ordered_json(*v) : ordered_json(nullptr); }

ordered_json stats_json(const QuantityStats& q) {
    ordered_json j;
    j["count"] = q.summary ? q.summary->count : 0;
    j["mean"] = q.summary ? ordered_json(q.summary->mean) : ordered_json(nullptr);
    j["sd"] = q.summary ? opt(q.summary->sd) : ordered_json(nullptr);
    j["min"] = q.summary ? ordered_json(q.summary->min) : ordered_json(nullptr);
    j["max"] = q.summary ? ordered_json(q.summary->max) : ordered_json(nullptr);
    j["cpk"] = opt(q.cpk);
    j["spec_min"] = opt(q.limits.min);
    j["spec_max"] = opt(q.limits.max);
    return j;
}

std::string esc(const std::string& s) { return report::html_escape(s); }

std::string fmt_opt(const std::optional<double>& v, const char* spec = "{:.4g}") {
    return v ? fmt::format(fmt::runtime(spec), *v) : std::string("—");
}

// A histogram of hFE with dashed lines at the spec limits.
std::string histogram_svg(const LotVerdict& v) {
    std::vector<double> h;
    for (const auto& d : v.devices)
        if (d.skipped_reason.empty() && d.hfe && std::isfinite(*d.hfe)) h.push_back(*d.hfe);
    const int W = 760, H = 300, L = 60, R = 20, T = 30, B = 45;
    std::string s = fmt::format(R"(<svg id="hfe-histogram" xmlns="http://www.w3.org/2000/svg" width="{}" height="{}" viewBox="0 0 {} {}" role="img">)", W, H, W, H);
    s += R"(<title>hFE of the tested devices</title>)";
    if (h.empty()) return s + fmt::format(R"(<text x="{}" y="{}">no devices tested</text></svg>)", L, H / 2);
    double lo = *std::min_element(h.begin(), h.end()), hi = *std::max_element(h.begin(), h.end());
    if (v.hfe.limits.min) lo = std::min(lo, *v.hfe.limits.min);
    if (v.hfe.limits.max) hi = std::max(hi, *v.hfe.limits.max);
    const double span = std::max(hi - lo, 1.0);
    lo -= 0.05 * span;
    hi += 0.05 * span;
    const int bins = std::clamp(static_cast<int>(std::ceil(std::sqrt(static_cast<double>(h.size())))) * 2, 8, 40);
    std::vector<int> count(static_cast<size_t>(bins), 0);
    for (double x : h) {
        const int k = std::clamp(static_cast<int>((x - lo) / (hi - lo) * bins), 0, bins - 1);
        ++count[static_cast<size_t>(k)];
    }
    const int top = std::max(1, *std::max_element(count.begin(), count.end()));
    auto px = [&](double x) { return L + (x - lo) / (hi - lo) * (W - L - R); };
    auto py = [&](double c) { return T + (1.0 - c / top) * (H - T - B); };
    s += fmt::format(R"(<line x1="{}" y1="{}" x2="{}" y2="{}" stroke="black"/>)", L, H - B, W - R, H - B);
    s += fmt::format(R"(<line x1="{}" y1="{}" x2="{}" y2="{}" stroke="black"/>)", L, T, L, H - B);
    for (int k = 0; k < bins; ++k) {
        if (!count[static_cast<size_t>(k)]) continue;
        const double x0 = px(lo + (hi - lo) * k / bins), x1 = px(lo + (hi - lo) * (k + 1) / bins);
        s += fmt::format(R"(<rect class="bar" x="{:.1f}" y="{:.1f}" width="{:.1f}" height="{:.1f}" fill="#6a8caf"/>)", x0,
                         py(count[static_cast<size_t>(k)]), std::max(0.5, x1 - x0 - 1), py(0) - py(count[static_cast<size_t>(k)]));
    }
    for (double t : report::linear_ticks(lo, hi, 8))
        if (t >= lo && t <= hi)
            s += fmt::format(R"(<text x="{:.1f}" y="{}" font-size="11" text-anchor="middle">{:g}</text>)", px(t), H - B + 15, t);
    s += fmt::format(R"(<text x="{}" y="{}" font-size="11" text-anchor="end">{}</text>)", L - 5, T + 4, top);
    s += fmt::format(R"(<text x="{}" y="{}" font-size="12" text-anchor="middle">hFE</text>)", (L + W - R) / 2, H - 8);
    for (const auto& [limit, label] : {std::pair{v.hfe.limits.min, "min"}, std::pair{v.hfe.limits.max, "max"}}) {
        if (!limit) continue;
        s += fmt::format(R"(<line class="spec-limit" x1="{0:.1f}" y1="{1}" x2="{0:.1f}" y2="{2}" stroke="#b00" stroke-dasharray="5,4"/>)",
                         px(*limit), T, H - B);
        s += fmt::format(R"(<text x="{:.1f}" y="{}" font-size="11" fill="#b00" text-anchor="middle">spec {} {:g}</text>)", px(*limit),
                         T - 8, label, *limit);
    }
    return s + "</svg>";
}

// Acceptance probability against defective fraction, both laws, with the lot's estimate marked.
std::string oc_svg(const LotVerdict& v) {
    const int W = 760, H = 300, L = 60, R = 20, T = 20, B = 45;
    const double pmax = v.oc.empty() ? 0.3 : v.oc.back().p;
    auto px = [&](double p) { return L + p / pmax * (W - L - R); };
    auto py = [&](double a) { return T + (1.0 - a) * (H - T - B); };
    std::string s = fmt::format(R"(<svg id="oc-curve" xmlns="http://www.w3.org/2000/svg" width="{}" height="{}" viewBox="0 0 {} {}" role="img">)", W, H, W, H);
    s += R"(<title>Operating characteristic of the plan</title>)";
    s += fmt::format(R"(<line x1="{}" y1="{}" x2="{}" y2="{}" stroke="black"/>)", L, H - B, W - R, H - B);
    s += fmt::format(R"(<line x1="{}" y1="{}" x2="{}" y2="{}" stroke="black"/>)", L, T, L, H - B);
    for (double t : report::linear_ticks(0, pmax * 100, 6))
        if (t <= pmax * 100 + 1e-9)
            s += fmt::format(R"(<text x="{:.1f}" y="{}" font-size="11" text-anchor="middle">{:g} %</text>)", px(t / 100), H - B + 15, t);
    for (double a : {0.0, 0.5, 1.0})
        s += fmt::format(R"(<text x="{}" y="{:.1f}" font-size="11" text-anchor="end">{:g}</text>)", L - 5, py(a) + 4, a);
    s += fmt::format(R"(<text x="{}" y="{}" font-size="12" text-anchor="middle">defective fraction</text>)", (L + W - R) / 2, H - 8);
    std::string bin, hyp;
    for (const auto& pt : v.oc) {
        bin += fmt::format("{}{:.1f},{:.1f}", bin.empty() ? "" : " ", px(pt.p), py(pt.accept_binomial));
        if (pt.accept_hypergeometric)
            hyp += fmt::format("{}{:.1f},{:.1f}", hyp.empty() ? "" : " ", px(pt.p), py(*pt.accept_hypergeometric));
    }
    s += fmt::format(R"(<polyline class="oc-binomial" fill="none" stroke="#225" stroke-width="2" points="{}"/>)", bin);
    if (!hyp.empty())
        s += fmt::format(R"(<polyline class="oc-hypergeometric" fill="none" stroke="#a60" stroke-dasharray="6,4" points="{}"/>)", hyp);
    if (v.tested > 0 && v.estimated_defective <= pmax)
        s += fmt::format(R"(<circle class="lot-estimate" cx="{:.1f}" cy="{:.1f}" r="5" fill="#b00"/>)", px(v.estimated_defective),
                         py(v.accept_at_estimate_binomial));
    return s + "</svg>";
}

}  // namespace

std::string verdict_word(long n, long c, long tested, long defectives) {
    if (defectives > c) return "reject";
    if (tested >= n) return "accept";
    return "incomplete";
}

LotVerdict lot_verdict(const store::Lot& lot, const std::vector<store::Device>& devices) {
    LotVerdict v;
    v.lot = lot;
    v.plan = stored_plan(lot);
    v.devices = devices;
    const SampleState s = sample_state(devices);
    v.tested = s.measured;
    v.defectives = s.defectives;
    std::vector<double> hfe, vbe, ic, vce;
    for (const auto& d : devices) {
        if (!d.skipped_reason.empty()) {
            ++v.skipped;
            continue;
        }
        if (d.hfe) hfe.push_back(*d.hfe);
        if (d.vbe_v) vbe.push_back(*d.vbe_v);
        if (d.ic_a && std::isfinite(*d.ic_a)) ic.push_back(*d.ic_a);
        if (d.vce_v && std::isfinite(*d.vce_v)) vce.push_back(*d.vce_v);
    }
    v.verdict = verdict_word(v.plan.sampling.n, v.plan.sampling.c, v.tested, v.defectives);
    v.hfe = stats_of("hfe", hfe, v.plan);
    v.vbe = stats_of("vbe_v", vbe, v.plan);
    if (!ic.empty()) v.mean_ic_a = lot::summarize(ic).mean;
    if (!vce.empty()) v.mean_vce_v = lot::summarize(vce).mean;
    const std::optional<long> qty = lot.quantity >= v.plan.sampling.n ? std::optional<long>(lot.quantity) : std::nullopt;
    v.oc = lot::oc_curve(v.plan.sampling, lot::default_oc_grid(), qty);
    if (v.tested > 0) v.estimated_defective = static_cast<double>(v.defectives) / static_cast<double>(v.tested);
    v.accept_at_estimate_binomial = lot::accept_binomial(v.plan.sampling.n, v.plan.sampling.c, v.estimated_defective);
    if (qty)
        v.accept_at_estimate_hypergeometric = lot::accept_hypergeometric(
            *qty, lot::lot_defectives(*qty, v.estimated_defective), v.plan.sampling.n, v.plan.sampling.c);
    return v;
}

std::string verdict_json(const LotVerdict& v) {
    ordered_json j;
    j["lot"] = v.lot.lot_code;
    j["part"] = v.plan.part;
    j["quantity"] = v.lot.quantity;
    j["supplier"] = v.lot.supplier;
    j["n"] = v.plan.sampling.n;
    j["c"] = v.plan.sampling.c;
    j["tested"] = v.tested;
    j["defectives"] = v.defectives;
    j["skipped"] = v.skipped;
    j["verdict"] = v.verdict;
    j["stats"] = {{"hfe", stats_json(v.hfe)}, {"vbe_v", stats_json(v.vbe)}};
    j["conditions"] = {{"spec_ic_a", opt(v.plan.condition_ic_a)},
                       {"spec_vce_v", opt(v.plan.condition_vce_v)},
                       {"mean_ic_a", opt(v.mean_ic_a)},
                       {"mean_vce_v", opt(v.mean_vce_v)}};
    j["jig_measured_on"] = v.plan.measured_on.empty() ? ordered_json(nullptr) : ordered_json(v.plan.measured_on);
    j["estimated_defective"] = v.estimated_defective;
    j["accept_at_estimate_binomial"] = v.accept_at_estimate_binomial;
    j["accept_at_estimate_hypergeometric"] = opt(v.accept_at_estimate_hypergeometric);
    j["oc"] = ordered_json::array();
    for (const auto& pt : v.oc) {
        ordered_json row;
        row["p"] = pt.p;
        row["accept_binomial"] = pt.accept_binomial;
        row["accept_hypergeometric"] = opt(pt.accept_hypergeometric);
        if (pt.lot_defectives) row["lot_defectives"] = *pt.lot_defectives;
        j["oc"].push_back(std::move(row));
    }
    ordered_json devs = ordered_json::array();
    for (const auto& d : v.devices) {
        ordered_json e;
        e["position"] = d.index;
        e["uuid"] = d.uuid;
        e["hfe"] = opt(d.hfe);
        e["hfe_sd"] = opt(d.hfe_sd);
        e["vbe_v"] = opt(d.vbe_v);
        e["vbe_sd_v"] = opt(d.vbe_sd_v);
        e["ic_a"] = opt(d.ic_a);
        e["ic_sd_a"] = opt(d.ic_sd_a);
        e["vce_v"] = opt(d.vce_v);
        e["vce_sd_v"] = opt(d.vce_sd_v);
        e["passed"] = d.passed ? ordered_json(*d.passed) : ordered_json(nullptr);
        e["skipped_reason"] = d.skipped_reason.empty() ? ordered_json(nullptr) : ordered_json(d.skipped_reason);
        e["replacement_of"] = d.replacement_of ? ordered_json(*d.replacement_of) : ordered_json(nullptr);
        e["id"] = d.id;
        devs.push_back(std::move(e));
    }
    j["devices"] = std::move(devs);
    return j.dump(2);
}

std::string lot_report_html(const LotVerdict& v) {
    std::string h = "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">";
    h += "<title>Lot " + esc(v.lot.lot_code) + " incoming inspection</title>";
    h += "<style>body{font-family:sans-serif;margin:2em;max-width:60em}table{border-collapse:collapse}"
         "td,th{border:1px solid #bbb;padding:2px 6px;text-align:right}th{background:#eee}"
         ".fail{color:#b00}.verdict{font-size:1.4em;font-weight:bold}</style></head><body>\n";
    h += "<h1>Incoming inspection of lot " + esc(v.lot.lot_code) + "</h1>\n";
    h += "<p>Part: " + esc(v.plan.part) + "<br>Supplier: " + esc(v.lot.supplier.empty() ? "not recorded" : v.lot.supplier) +
         "<br>Quantity: " + std::to_string(v.lot.quantity) + "<br>Plan: " + esc(v.plan.path) + "</p>\n";
    h += "<h2>Verdict</h2>\n";
    h += fmt::format("<p class=\"verdict\" id=\"verdict\">{}</p>\n", esc(v.verdict));
    h += fmt::format("<p>Sample n = {}, acceptance number c = {}: {} tested, {} defective, {} skipped and replaced.<br>"
                     "Estimated defective fraction {:.3g} %; the plan accepts a lot at that fraction with probability "
                     "{:.4f} (binomial){}.</p>\n",
                     v.plan.sampling.n, v.plan.sampling.c, v.tested, v.defectives, v.skipped, 100 * v.estimated_defective,
                     v.accept_at_estimate_binomial,
                     v.accept_at_estimate_hypergeometric ? fmt::format(", {:.4f} (hypergeometric, lot of {})",
                                                                       *v.accept_at_estimate_hypergeometric, v.lot.quantity)
                                                         : std::string());
    h += "<h2>Test conditions</h2>\n<table><tr><th></th><th>spec</th><th>measured (mean)</th></tr>";
    h += "<tr><td>I_C</td><td>" + esc(v.plan.condition_ic_a ? format_eng(*v.plan.condition_ic_a, "A") : "—") + "</td><td>" +
         esc(v.mean_ic_a ? format_eng(*v.mean_ic_a, "A") : "—") + "</td></tr>";
    h += "<tr><td>V_CE</td><td>" + esc(v.plan.condition_vce_v ? format_eng(*v.plan.condition_vce_v, "V") : "—") + "</td><td>" +
         esc(v.mean_vce_v ? format_eng(*v.mean_vce_v, "V") : "—") + "</td></tr></table>\n";
    h += "<p>Jig calibration (resistors measured): " +
         esc(v.plan.measured_on.empty() ? "not measured; nominal values with their tolerances" : v.plan.measured_on) + "</p>\n";
    h += "<h2>Statistics</h2>\n<table><tr><th></th><th>count</th><th>mean</th><th>sd</th><th>min</th><th>max</th><th>spec</th><th>Cpk</th></tr>";
    for (const QuantityStats* q : {&v.hfe, &v.vbe}) {
        const auto& s = q->summary;
        h += "<tr><td>" + esc(q->name == "hfe" ? "hFE" : "V_BE (V)") + "</td>";
        h += fmt::format("<td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td>", s ? s->count : 0,
                         s ? fmt::format("{:.4g}", s->mean) : "—", s ? fmt_opt(s->sd) : "—",
                         s ? fmt::format("{:.4g}", s->min) : "—", s ? fmt::format("{:.4g}", s->max) : "—");
        h += "<td>" + esc(fmt_opt(q->limits.min, "{:g}") + " … " + fmt_opt(q->limits.max, "{:g}")) + "</td><td>" +
             fmt_opt(q->cpk, "{:.3f}") + "</td></tr>";
    }
    h += "</table>\n<h2>hFE histogram</h2>\n" + histogram_svg(v) + "\n";
    h += "<h2>Operating characteristic of the plan</h2>\n" + oc_svg(v) +
         "\n<p>Solid: binomial law; dashed: hypergeometric law for this lot; dot: this lot's estimate.</p>\n";
    h += "<h2>Devices</h2>\n<table id=\"devices\"><tr><th>position</th><th>hFE</th><th>u(hFE)</th><th>V_BE (V)</th>"
         "<th>I_C</th><th>V_CE (V)</th><th>result</th></tr>";
    for (const auto& d : v.devices) {
        std::string result;
        if (!d.skipped_reason.empty()) result = "skipped: " + d.skipped_reason;
        else result = d.passed && *d.passed ? "pass" : "fail";
        if (d.replacement_of) result += " (replacement)";
        h += fmt::format("<tr class=\"device{}\"><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
                         d.passed && !*d.passed ? " fail" : "", d.index, fmt_opt(d.hfe, "{:.1f}"), fmt_opt(d.hfe_sd, "{:.2f}"),
                         fmt_opt(d.vbe_v, "{:.4f}"), esc(d.ic_a ? format_eng(*d.ic_a, "A") : "—"), fmt_opt(d.vce_v, "{:.3f}"),
                         esc(result));
    }
    h += "</table>\n<p>Uncertainties are standard uncertainties (GUM, JCGM 100:2008) from the jig's resistor values "
         "and the meter's stated accuracy.</p>\n</body></html>\n";
    return h;
}

}  // namespace ampbench::procedures

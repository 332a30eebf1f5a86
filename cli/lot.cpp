// `ampbench lot ...`: incoming inspection of transistor lots. Each subcommand is one add_lot_*
// function below registering itself on the `lot` group: `curve` tabulates a plan's
// operating-characteristic curve to help choose (n, c); `start` records a lot, `measure` runs
// its sample on the jig, `verdict` and `report` judge it. `ampbench lots` lists every lot.
#include <filesystem>
#include <fstream>
#include <iostream>
#include <memory>
#include <optional>
#include <sstream>

#include <CLI/CLI.hpp>
#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "cli/commands.h"
#include "cli/procedures/lot_inspection.h"
#include "cli/procedures/lot_verdict.h"
#include "core/bench_file.h"
#include "core/errors.h"
#include "core/interrupt.h"
#include "core/value.h"
#include "drivers/bench_instruments.h"
#include "drivers/calibration.h"
#include "drivers/sim/tray.h"
#include "fit/lot/lot_plan.h"
#include "fit/lot/sampling.h"
#include "store/archive.h"

namespace ampbench::cli {
namespace {

using ordered_json = nlohmann::ordered_json;

// The (n, c) options as given; checked here so a bad plan is a usage error naming the option.
lot::SamplingPlan checked_plan(long n, long c, std::optional<long> qty) {
    if (n < 1) throw UsageError(fmt::format("lot: --n {} must be at least 1", n));
    if (c < 0) throw UsageError(fmt::format("lot: --c {} must not be negative", c));
    if (c >= n)
        throw UsageError(fmt::format(
            "lot: --c {} must be below --n {} (the plan would accept every lot)", c, n));
    if (qty && *qty < n)
        throw UsageError(fmt::format("lot: --n {} exceeds the lot quantity --qty {}", n, *qty));
    return {n, c};
}

struct CurveOptions {
    long n = 0;
    long c = 0;
    std::optional<long> qty;
    bool json = false;
};

int run_curve(const CurveOptions& o, Context& ctx) {
    const lot::SamplingPlan plan = checked_plan(o.n, o.c, o.qty);
    const auto curve = lot::oc_curve(plan, lot::default_oc_grid(), o.qty);
    // The producer's- and consumer's-risk points (95 % and 10 % acceptance), binomial law.
    const double p95 = lot::fraction_at_acceptance(plan, 0.95);
    const double p10 = lot::fraction_at_acceptance(plan, 0.10);
    if (o.json) {
        ordered_json doc;
        doc["n"] = plan.n;
        doc["c"] = plan.c;
        doc["qty"] = o.qty ? ordered_json(*o.qty) : ordered_json(nullptr);
        doc["p_accept_95"] = p95;
        doc["p_accept_10"] = p10;
        doc["oc"] = ordered_json::array();
        for (const auto& pt : curve) {
            ordered_json row;
            row["p"] = pt.p;
            row["accept_binomial"] = pt.accept_binomial;
            row["accept_hypergeometric"] =
                pt.accept_hypergeometric ? ordered_json(*pt.accept_hypergeometric) : ordered_json(nullptr);
            if (pt.lot_defectives) row["lot_defectives"] = *pt.lot_defectives;
            doc["oc"].push_back(std::move(row));
        }
        ctx.out << doc.dump(2) << "\n";
        return 0;
    }
    ctx.out << fmt::format("Operating characteristic of the plan n = {}, c = {}{}\n", plan.n,
                           plan.c, o.qty ? fmt::format(", lot of {}", *o.qty) : "");
    ctx.out << fmt::format("Accepts 95 % of lots at {:.3g} % defective and 10 % of lots at {:.3g} % "
                           "defective (binomial law).\n\n",
                           p95 * 100, p10 * 100);
    ctx.out << fmt::format("{:>11}  {:>17}", "defective", "accept, binomial");
    if (o.qty) ctx.out << fmt::format("  {:>22}", fmt::format("accept, lot of {}", *o.qty));
    ctx.out << "\n";
    for (const auto& pt : curve) {
        ctx.out << fmt::format("{:>9.1f} %  {:>17.4f}", pt.p * 100, pt.accept_binomial);
        if (pt.accept_hypergeometric)
            ctx.out << fmt::format("  {:>12.4f} ({:>3} bad)", *pt.accept_hypergeometric,
                                   *pt.lot_defectives);
        ctx.out << "\n";
    }
    return 0;
}

void add_lot_curve(CLI::App& lot_app, Context& ctx) {
    auto o = std::make_shared<CurveOptions>();
    auto* cmd = lot_app.add_subcommand(
        "curve", "Operating-characteristic curve of an (n, c) sampling plan, to choose a plan");
    cmd->add_option("--n", o->n, "Sample size: devices tested per lot")->required();
    cmd->add_option("--c", o->c, "Acceptance number: most defectives a lot may show and pass")
        ->required();
    cmd->add_option("--qty", o->qty, "Lot quantity (adds the hypergeometric law for this lot)");
    cmd->add_flag("--json", o->json, "Machine-readable output");
    cmd->callback([o, &ctx] { ctx.action = [o, &ctx] { return run_curve(*o, ctx); }; });
}

// ---- lot start ------------------------------------------------------------------------------

struct StartOptions {
    std::string plan, lot, supplier;
    long qty = 0;
};

int run_start(const StartOptions& o, Context& ctx) {
    // Every check of the plan before anything is stored: c < n, min <= max, n <= qty, the dut
    // and every reading node present in the jig.
    const lot::LotPlan plan = lot::load_lot_plan(o.plan);
    lot::validate_plan_quantity(plan, o.qty);
    const lot::JigDesign jig = lot::load_plan_jig(plan);
    if (o.lot.empty()) throw UsageError("lot start: --lot must not be empty");
    std::ifstream in(o.plan, std::ios::binary);
    std::ostringstream text;
    text << in.rdbuf();
    nlohmann::json stored;
    stored["file"] = std::filesystem::absolute(o.plan).lexically_normal().string();
    stored["plan"] = nlohmann::json::parse(text.str());
    auto archive = store::open_archive(ctx.db_path());
    if (archive->lot(o.lot))
        throw InputError(archive->location(), "lot", fmt::format("lot '{}' is already in the archive", o.lot));
    store::Lot l;
    l.lot_code = o.lot;
    l.plan_json = stored.dump();
    l.quantity = o.qty;
    l.supplier = o.supplier;
    archive->add_lot(l);
    ctx.out << fmt::format("Lot {} recorded: {} of {}{}; jig {} (socket {}).\n"
                           "Sample {} devices, accept with at most {} defective. Next: ampbench lot measure {} --bench BENCH\n",
                           o.lot, o.qty, plan.part.empty() ? "devices" : plan.part,
                           o.supplier.empty() ? "" : " from " + o.supplier, jig.path, jig.dut, plan.sampling.n,
                           plan.sampling.c, o.lot);
    return 0;
}

void add_lot_start(CLI::App& lot_app, Context& ctx) {
    auto o = std::make_shared<StartOptions>();
    auto* cmd = lot_app.add_subcommand("start", "Record a new lot against its inspection plan");
    cmd->add_option("--plan", o->plan, "Lot plan file (ampbench-lot-plan/1)")->required();
    cmd->add_option("--lot", o->lot, "Lot code, e.g. LOT-2611-BC1")->required();
    cmd->add_option("--qty", o->qty, "Number of devices in the lot")->required();
    cmd->add_option("--supplier", o->supplier, "Who supplied the lot");
    cmd->callback([o, &ctx] { ctx.action = [o, &ctx] { return run_start(*o, ctx); }; });
}

// ---- lot measure ----------------------------------------------------------------------------

struct MeasureOptions {
    std::string lot, bench, answers;
    bool automatic = false, manual = false, ask = false;
};

store::InstrumentRecord record_of(drivers::Instrument* i, const InstrumentSpec& spec) {
    const drivers::Identity id = i->identify();
    return {spec.role, fmt::format("{},{},{},{}", id.manufacturer, id.model, id.serial, id.firmware), spec.asset,
            spec.uri, spec.cal_due, spec.certificate, "{}"};
}

int run_measure(const MeasureOptions& o, Context& ctx) {
    if (o.automatic && o.ask) throw UsageError("lot measure: --auto and --ask contradict each other");
    if (o.bench.empty() && !o.manual) throw UsageError("lot measure: give --bench (or --manual to type the readings)");
    install_interrupt_handler();
    auto archive = store::open_archive(ctx.db_path());
    const std::optional<store::Lot> lot = archive->lot(o.lot);
    if (!lot)
        throw InputError(archive->location(), "lot",
                         fmt::format("no lot '{}' in the archive (start it with 'ampbench lot start')", o.lot));
    const lot::LotPlan plan = procedures::stored_plan(*lot);

    std::optional<BenchFile> bench;
    if (!o.bench.empty()) bench = load_bench_file(o.bench);
    procedures::LotStation station;
    std::unique_ptr<VirtualClock> vclock;
    std::unique_ptr<RealClock> rclock;
    std::unique_ptr<sim::VirtualTray> tray;
    drivers::BenchInstruments inst;
    if (bench) {
        for (const std::string& w : drivers::enforce_calibration(*bench, drivers::today_utc()))
            ctx.err << "warning: " << w << "\n";
        drivers::OpenOptions options;
        if (bench->is_virtual()) {
            vclock = std::make_unique<VirtualClock>();
            station.clock = vclock.get();
            const InstrumentSpec& any = bench->meter.present ? static_cast<const InstrumentSpec&>(bench->meter)
                                                             : static_cast<const InstrumentSpec&>(bench->supply);
            const std::optional<sim::TraySpec> ts = sim::parse_tray_spec(any.uri, any.role + ".uri");
            if (!ts)
                throw InputError(bench->path, any.role + ".uri",
                                 "a virtual bench for lots needs a tray: sim://?tray=SEED&defective=SHARE");
            tray = std::make_unique<sim::VirtualTray>(lot::load_plan_jig(plan), *bench, *ts, *vclock);
            options.virtual_transport = tray->transport_factory();
            station.device_inserted = [&tray](std::int64_t draw) { tray->insert(draw); };
        } else {
            rclock = std::make_unique<RealClock>();
            station.clock = rclock.get();
        }
        options.clock = station.clock;
        if (!ctx.global.trace.empty()) options.trace = std::make_shared<drivers::TraceLog>(ctx.global.trace);
        inst = drivers::open_bench_instruments(*bench, options);
        station.bench_file = bench->path;
        if (inst.meter) station.instruments.push_back(record_of(inst.meter.get(), bench->meter));
        if (inst.supply) station.instruments.push_back(record_of(inst.supply.get(), bench->supply));
        if (!o.manual) {
            if (!inst.meter) throw InputError(bench->path, "meter", "lot measure needs a meter (or --manual)");
            station.meter = inst.meter.get();
        }
        station.supply = inst.supply.get();
        if (bench->meter.present) {
            station.meter_model.input_ohms = bench->meter.input_ohms;
            station.meter_model.accuracy = bench->meter.accuracy;
            for (const auto& [channel, node] : bench->meter.channels) station.channel_of_node[lot::canonical_node(node)] = channel;
        }
    } else {
        rclock = std::make_unique<RealClock>();
        station.clock = rclock.get();
    }

    std::ifstream answers;
    if (!o.answers.empty()) {
        answers.open(o.answers);
        if (!answers) throw InputError(o.answers, "", "cannot read the answers file");
    }
    std::istream& in = o.answers.empty() ? std::cin : answers;
    const bool automatic = o.automatic || (tray && !o.ask && o.answers.empty());
    procedures::AutomaticOperator auto_op;
    procedures::StreamOperator stream_op(in, ctx.out);
    procedures::LotOperator& op = automatic ? static_cast<procedures::LotOperator&>(auto_op) : stream_op;

    const procedures::LotMeasureOutcome r = procedures::measure_lot(*archive, o.lot, station, op, ctx.out);
    const std::vector<store::Device> devices = archive->devices(lot->id);
    const procedures::LotVerdict v = procedures::lot_verdict(*lot, devices);
    if (v.verdict != "incomplete") archive->set_lot_status(lot->id, v.verdict == "accept" ? "accepted" : "rejected");
    ctx.out << fmt::format("\n{} measured and {} skipped in this run; {} of {} tested, {} defective: {}.{}\n",
                           r.measured_now, r.skipped_now, v.tested, r.n, v.defectives, v.verdict,
                           r.stopped ? fmt::format(" Stopped; run 'ampbench lot measure {}' again to continue.", o.lot)
                                     : std::string());
    return 0;
}

void add_lot_measure(CLI::App& lot_app, Context& ctx) {
    auto o = std::make_shared<MeasureOptions>();
    auto* cmd = lot_app.add_subcommand("measure", "Measure a lot's sample on the jig, device by device (resumes)");
    cmd->add_option("lot", o->lot, "Lot code")->required();
    cmd->add_option("--bench", o->bench, "Bench file with the jig's meter and supply");
    cmd->add_flag("--auto", o->automatic, "No prompts: a virtual tray or an automatic handler changes the devices");
    cmd->add_flag("--manual", o->manual, "Type the readings (no meter connected)");
    cmd->add_flag("--ask", o->ask, "Ask the operator even on a virtual tray");
    cmd->add_option("--answers", o->answers, "Read the operator's answers from FILE, one per line, instead of the terminal");
    cmd->callback([o, &ctx] { ctx.action = [o, &ctx] { return run_measure(*o, ctx); }; });
}

// ---- lot verdict / report -------------------------------------------------------------------

struct VerdictOptions {
    std::string lot, html;
    bool json = false;
};

procedures::LotVerdict load_verdict(store::Archive& archive, const std::string& code) {
    const std::optional<store::Lot> lot = archive.lot(code);
    if (!lot) throw InputError(archive.location(), "lot", fmt::format("no lot '{}' in the archive", code));
    return procedures::lot_verdict(*lot, archive.devices(lot->id));
}

std::string stats_line(const procedures::QuantityStats& q, const char* label, const char* number) {
    if (!q.summary) return fmt::format("  {:<5} no devices tested\n", label);
    const auto& s = *q.summary;
    return fmt::format("  {:<5} mean {}  sd {}  min {}  max {}  Cpk {}\n", label, fmt::format(fmt::runtime(number), s.mean),
                       s.sd ? fmt::format(fmt::runtime(number), *s.sd) : "—", fmt::format(fmt::runtime(number), s.min),
                       fmt::format(fmt::runtime(number), s.max), q.cpk ? fmt::format("{:.3f}", *q.cpk) : "—");
}

int run_verdict(const VerdictOptions& o, Context& ctx) {
    auto archive = store::open_archive(ctx.db_path());
    const procedures::LotVerdict v = load_verdict(*archive, o.lot);
    if (v.verdict != "incomplete") archive->set_lot_status(v.lot.id, v.verdict == "accept" ? "accepted" : "rejected");
    if (o.json) {
        ctx.out << procedures::verdict_json(v) << "\n";
        return 0;
    }
    ctx.out << fmt::format("Lot {}: {}\n", v.lot.lot_code, v.verdict);
    ctx.out << fmt::format("  plan n = {}, c = {}; {} tested, {} defective, {} skipped and replaced\n", v.plan.sampling.n,
                           v.plan.sampling.c, v.tested, v.defectives, v.skipped);
    ctx.out << stats_line(v.hfe, "hFE", "{:.1f}") << stats_line(v.vbe, "V_BE", "{:.4f}");
    ctx.out << fmt::format("  conditions: spec I_C {} V_CE {}; measured mean I_C {} V_CE {}\n",
                           v.plan.condition_ic_a ? format_eng(*v.plan.condition_ic_a, "A") : "—",
                           v.plan.condition_vce_v ? format_eng(*v.plan.condition_vce_v, "V") : "—",
                           v.mean_ic_a ? format_eng(*v.mean_ic_a, "A") : "—", v.mean_vce_v ? format_eng(*v.mean_vce_v, "V") : "—");
    ctx.out << fmt::format("  estimated defective {:.3g} %: the plan accepts such lots with probability {:.4f} (binomial){}\n",
                           100 * v.estimated_defective, v.accept_at_estimate_binomial,
                           v.accept_at_estimate_hypergeometric
                               ? fmt::format(", {:.4f} (hypergeometric)", *v.accept_at_estimate_hypergeometric)
                               : std::string());
    ctx.out << fmt::format("\n{:>11}  {:>17}  {:>22}\n", "defective", "accept, binomial", "accept, this lot");
    for (const auto& pt : v.oc)
        ctx.out << fmt::format("{:>9.1f} %  {:>17.4f}  {:>22}\n", pt.p * 100, pt.accept_binomial,
                               pt.accept_hypergeometric ? fmt::format("{:.4f}", *pt.accept_hypergeometric) : "—");
    return 0;
}

int run_report(const VerdictOptions& o, Context& ctx) {
    auto archive = store::open_archive(ctx.db_path());
    const procedures::LotVerdict v = load_verdict(*archive, o.lot);
    const std::string html = procedures::lot_report_html(v);
    // Written beside the target and renamed, so a failure leaves no partial file.
    const std::string tmp = o.html + ".part";
    {
        std::ofstream f(tmp, std::ios::binary | std::ios::trunc);
        if (!f) throw InputError(o.html, "", "cannot write the report");
        f << html;
        if (!f.flush()) throw InputError(o.html, "", "cannot write the report");
    }
    std::error_code ec;
    std::filesystem::rename(tmp, o.html, ec);
    if (ec) {
        std::filesystem::remove(tmp, ec);
        throw InputError(o.html, "", "cannot write the report");
    }
    ctx.out << fmt::format("Report of lot {} ({}) written to {}\n", v.lot.lot_code, v.verdict, o.html);
    return 0;
}

void add_lot_verdict(CLI::App& lot_app, Context& ctx) {
    auto o = std::make_shared<VerdictOptions>();
    auto* cmd = lot_app.add_subcommand("verdict", "Accept, reject or incomplete, with statistics and the OC curve");
    cmd->add_option("lot", o->lot, "Lot code")->required();
    cmd->add_flag("--json", o->json, "Machine-readable output");
    cmd->callback([o, &ctx] { ctx.action = [o, &ctx] { return run_verdict(*o, ctx); }; });
}

void add_lot_report(CLI::App& lot_app, Context& ctx) {
    auto o = std::make_shared<VerdictOptions>();
    auto* cmd = lot_app.add_subcommand("report", "Self-contained HTML report of a lot");
    cmd->add_option("lot", o->lot, "Lot code")->required();
    cmd->add_option("--html", o->html, "Report file to write")->required();
    cmd->callback([o, &ctx] { ctx.action = [o, &ctx] { return run_report(*o, ctx); }; });
}

// ---- lots -----------------------------------------------------------------------------------

int run_lots(bool json, Context& ctx) {
    auto archive = store::open_archive(ctx.db_path());
    ordered_json all = ordered_json::array();
    std::string table = fmt::format("{:<16} {:>6} {:>4} {:>3} {:>7} {:>10}  {:<11} {}\n", "lot", "qty", "n", "c", "tested",
                                    "defective", "verdict", "supplier");
    for (const store::Lot& l : archive->lots()) {
        const procedures::LotVerdict v = procedures::lot_verdict(l, archive->devices(l.id));
        ordered_json e;
        e["lot"] = l.lot_code;
        e["quantity"] = l.quantity;
        e["supplier"] = l.supplier;
        e["n"] = v.plan.sampling.n;
        e["c"] = v.plan.sampling.c;
        e["tested"] = v.tested;
        e["defectives"] = v.defectives;
        e["verdict"] = v.verdict;
        e["created_utc"] = l.created_utc;
        all.push_back(std::move(e));
        table += fmt::format("{:<16} {:>6} {:>4} {:>3} {:>7} {:>10}  {:<11} {}\n", l.lot_code, l.quantity, v.plan.sampling.n,
                             v.plan.sampling.c, v.tested, v.defectives, v.verdict, l.supplier);
    }
    if (json) ctx.out << all.dump(2) << "\n";
    else if (all.empty()) ctx.out << "No lots in the archive.\n";
    else ctx.out << table;
    return 0;
}

}  // namespace

void add_lot_command(CLI::App& app, Context& ctx) {
    auto* lot_app = app.add_subcommand("lot", "Incoming inspection of transistor lots");
    lot_app->require_subcommand(1);
    add_lot_curve(*lot_app, ctx);
    add_lot_start(*lot_app, ctx);
    add_lot_measure(*lot_app, ctx);
    add_lot_verdict(*lot_app, ctx);
    add_lot_report(*lot_app, ctx);
}

void add_lots_command(CLI::App& app, Context& ctx) {
    auto json = std::make_shared<bool>(false);
    auto* cmd = app.add_subcommand("lots", "All lots in the archive with their verdicts");
    cmd->add_flag("--json", *json, "Machine-readable output");
    cmd->callback([json, &ctx] { ctx.action = [json, &ctx] { return run_lots(*json, ctx); }; });
}

}  // namespace ampbench::cli

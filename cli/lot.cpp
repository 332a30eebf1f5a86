// `ampbench lot ...`: incoming inspection of transistor lots. Each subcommand is one add_lot_*
// function below registering itself on the `lot` group; `curve` tabulates a plan's
// operating-characteristic curve to help choose (n, c).
#include <memory>
#include <optional>

#include <CLI/CLI.hpp>
#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "cli/commands.h"
#include "core/errors.h"
#include "fit/lot/sampling.h"

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

}  // namespace

void add_lot_command(CLI::App& app, Context& ctx) {
    auto* lot_app = app.add_subcommand("lot", "Incoming inspection of transistor lots");
    lot_app->require_subcommand(1);
    add_lot_curve(*lot_app, ctx);
}

}  // namespace ampbench::cli

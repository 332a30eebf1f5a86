// `ampbench check BENCH [--json] [--timeout-ms N]`: opens each instrument of a bench, asks *IDN?,
// drains the error queue (nothing else is sent) and reports identity, errors, round trip and
// calibration state. Exit 0 when every instrument answers, 3 otherwise.
#include <chrono>
#include <optional>

#include <CLI/CLI.hpp>
#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "cli/commands.h"
#include "core/bench_file.h"
#include "core/errors.h"
#include "drivers/bench_instruments.h"
#include "drivers/calibration.h"

namespace ampbench::cli {
namespace {

struct CheckArgs {
    std::string bench;
    bool json = false;
    double timeout_ms = 0.0;
};

struct CheckResult {
    std::string role, uri;
    bool ok = false;
    std::optional<drivers::Identity> idn;
    std::vector<std::string> errors;
    double round_trip_ms = 0.0;
    std::string problem;
    drivers::CalibrationState calibration;
};

CheckResult check_one(const InstrumentSpec& spec, const BenchFile& bench, const drivers::OpenOptions& options,
                      const std::string& today) {
    CheckResult r;
    r.role = spec.role;
    r.uri = spec.uri;
    r.calibration = drivers::calibration_state(spec, today);
    try {
        auto opened = drivers::open_session(spec, bench, options);
        const auto t0 = std::chrono::steady_clock::now();
        r.idn = opened.session->identify();
        r.round_trip_ms = std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count();
        for (const auto& e : opened.session->drain_errors())
            r.errors.push_back(fmt::format("{},\"{}\" ({})", e.code, e.message, drivers::scpi_error_class(e.code)));
        r.ok = true;
    } catch (const InputError&) {
        throw;
    } catch (const Error& e) {
        r.problem = e.what();
    }
    if (r.ok && r.calibration.status == drivers::CalibrationStatus::past_due && bench.limits.calibration == "refuse") {
        r.ok = false;
        r.problem = fmt::format("calibration past due since {} (limits.calibration is refuse)", spec.cal_due);
    }
    return r;
}

int run_check(const CheckArgs& args, Context& ctx) {
    const BenchFile bench = load_bench_file(args.bench);
    drivers::OpenOptions options;
    if (!ctx.global.trace.empty()) options.trace = std::make_shared<drivers::TraceLog>(ctx.global.trace);
    options.timeout_s = args.timeout_ms / 1000.0;
    const std::string today = drivers::today_utc();

    std::vector<CheckResult> results;
    for (const InstrumentSpec* spec : bench.instruments()) results.push_back(check_one(*spec, bench, options, today));
    bool all_ok = true;
    for (const auto& r : results) all_ok = all_ok && r.ok;

    if (args.json) {
        nlohmann::ordered_json doc;
        doc["instruments"] = nlohmann::ordered_json::array();
        for (const auto& r : results) {
            nlohmann::ordered_json j;
            j["role"] = r.role;
            j["uri"] = r.uri;
            j["ok"] = r.ok;
            if (r.idn)
                j["idn"] = {{"manufacturer", r.idn->manufacturer}, {"model", r.idn->model},
                            {"serial", r.idn->serial}, {"firmware", r.idn->firmware}};
            else
                j["idn"] = nullptr;
            j["errors"] = r.errors;
            j["round_trip_ms"] = r.round_trip_ms;
            j["problem"] = r.problem.empty() ? nlohmann::ordered_json(nullptr) : nlohmann::ordered_json(r.problem);
            j["calibration"] = {{"state", r.calibration.status == drivers::CalibrationStatus::past_due  ? "past due"
                                          : r.calibration.status == drivers::CalibrationStatus::in_date ? "in date"
                                                                                                         : "not given"},
                                {"cal_due", r.calibration.cal_due.empty() ? nlohmann::ordered_json(nullptr)
                                                                          : nlohmann::ordered_json(r.calibration.cal_due)}};
            doc["instruments"].push_back(std::move(j));
        }
        ctx.out << doc.dump(2) << "\n";
    } else {
        if (results.empty()) ctx.out << "the bench lists no instruments\n";
        for (const auto& r : results) {
            ctx.out << fmt::format("{:<9} {}\n", r.role, r.uri);
            if (r.idn)
                ctx.out << fmt::format("  identity     {} {}, serial {}, firmware {}\n", r.idn->manufacturer,
                                       r.idn->model, r.idn->serial, r.idn->firmware);
            if (r.ok) {
                ctx.out << fmt::format("  round trip   {:.1f} ms\n", r.round_trip_ms);
                const std::string errors = r.errors.empty() ? "none" : fmt::format("{}", fmt::join(r.errors, "; "));
                ctx.out << fmt::format("  errors       {}\n", errors);
            }
            ctx.out << fmt::format("  calibration  {}\n", r.calibration.describe());
            ctx.out << fmt::format("  state        {}\n", r.ok ? "answers" : "PROBLEM: " + r.problem);
        }
    }
    return all_ok ? 0 : static_cast<int>(ExitCode::instrument);
}

}  // namespace

void add_check_command(CLI::App& app, Context& ctx) {
    auto args = std::make_shared<CheckArgs>();
    auto* cmd = app.add_subcommand("check", "Ask each instrument of a bench who it is and whether it has errors");
    cmd->add_option("bench", args->bench, "Bench file (ampbench-bench/1)")->required();
    cmd->add_flag("--json", args->json, "Machine-readable output");
    cmd->add_option("--timeout-ms", args->timeout_ms, "Reply timeout per query (default: the profile's)")
        ->check(CLI::Range(1.0, 600000.0));
    cmd->callback([args, &ctx] { ctx.action = [args, &ctx] { return run_check(*args, ctx); }; });
}

}  // namespace ampbench::cli

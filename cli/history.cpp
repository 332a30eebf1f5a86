// `ampbench history SERIAL [--json]`: every session of one board, newest first, with its status,
// reading count, instruments and the fitted midband gain and corners where there is a fit.
#include <CLI/CLI.hpp>
#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "cli/commands.h"
#include "core/errors.h"
#include "core/value.h"
#include "store/archive.h"

namespace ampbench::cli {
namespace {

struct HistoryOptions {
    std::string serial;
    bool json = false;
};

nlohmann::json number_or_null(const std::optional<double>& v) {
    return v ? nlohmann::json(*v) : nlohmann::json(nullptr);
}

std::string instruments_text(const std::vector<store::InstrumentRecord>& instruments) {
    std::string out;
    for (const auto& i : instruments) {
        if (!out.empty()) out += ", ";
        out += i.role + " " + (i.asset.empty() ? i.identity : i.asset);
    }
    return out.empty() ? "-" : out;
}

int run_history(Context& ctx, const HistoryOptions& opt) {
    auto archive = store::open_archive(ctx.db_path());
    const auto board = archive->board(opt.serial);
    if (!board)
        throw InputError(ctx.db_path(), "board",
                         fmt::format("no board with serial '{}' in the archive", opt.serial));
    std::string design_name;
    if (!board->design_address.empty())
        if (const auto d = archive->design(board->design_address)) design_name = d->name;
    const auto sessions = archive->history(opt.serial);

    if (opt.json) {
        nlohmann::json doc;
        doc["board"] = board->serial;
        doc["design"] = board->design_address.empty() ? nlohmann::json(nullptr)
                                                      : nlohmann::json(board->design_address);
        doc["design_name"] = design_name;
        doc["sessions"] = nlohmann::json::array();
        for (const auto& s : sessions) {
            nlohmann::json instruments = nlohmann::json::array();
            for (const auto& i : s.instruments)
                instruments.push_back(
                    {{"role", i.role}, {"identity", i.identity}, {"asset", i.asset}});
            doc["sessions"].push_back(
                {{"id", s.session.id},
                 {"kind", store::to_string(s.session.kind)},
                 {"status", store::to_string(s.session.status)},
                 {"started", s.session.started_utc},
                 {"finished", s.session.finished_utc.empty()
                                  ? nlohmann::json(nullptr)
                                  : nlohmann::json(s.session.finished_utc)},
                 {"points", s.point_count},
                 {"instruments", instruments},
                 {"midband_gain_db", number_or_null(s.midband_gain_db)},
                 {"f_low_hz", number_or_null(s.f_low_hz)},
                 {"f_high_hz", number_or_null(s.f_high_hz)}});
        }
        ctx.out << doc.dump(2, ' ', false, nlohmann::json::error_handler_t::replace) << "\n";
        return 0;
    }

    ctx.out << fmt::format("board {}", board->serial);
    if (!board->design_address.empty())
        ctx.out << fmt::format("  design {} ({})", design_name.empty() ? "-" : design_name,
                               board->design_address.substr(0, 12));
    ctx.out << "\n";
    if (sessions.empty()) {
        ctx.out << "no sessions\n";
        return 0;
    }
    ctx.out << fmt::format("{:>7}  {:<6}  {:<11}  {:<20}  {:>6}  {:>10}  {:>10}  {:>10}  {}\n",
                           "session", "kind", "status", "started", "points", "midband",
                           "f_low", "f_high", "instruments");
    auto db = [](const std::optional<double>& v) {
        return v ? fmt::format("{:.2f} dB", *v) : std::string("-");
    };
    auto hz = [](const std::optional<double>& v) {
        return v ? format_eng(*v, "Hz", 3) : std::string("-");
    };
    for (const auto& s : sessions)
        ctx.out << fmt::format("{:>7}  {:<6}  {:<11}  {:<20}  {:>6}  {:>10}  {:>10}  {:>10}  {}\n",
                               s.session.id, store::to_string(s.session.kind),
                               store::to_string(s.session.status), s.session.started_utc,
                               s.point_count, db(s.midband_gain_db), hz(s.f_low_hz),
                               hz(s.f_high_hz), instruments_text(s.instruments));
    return 0;
}

}  // namespace

void add_history_command(CLI::App& app, Context& ctx) {
    auto opt = std::make_shared<HistoryOptions>();
    auto* cmd = app.add_subcommand("history", "Every session of one board, newest first");
    cmd->add_option("serial", opt->serial, "Board serial number")->required();
    cmd->add_flag("--json", opt->json, "Print JSON instead of a table");
    cmd->callback([opt, &ctx] { ctx.action = [opt, &ctx] { return run_history(ctx, *opt); }; });
}

}  // namespace ampbench::cli

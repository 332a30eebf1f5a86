// `ampbench boards [--json]`: every board in the archive with its latest session and result.
#include <CLI/CLI.hpp>
#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "cli/commands.h"
#include "core/value.h"
#include "store/archive.h"

namespace ampbench::cli {
namespace {

nlohmann::json number_or_null(const std::optional<double>& v) {
    return v ? nlohmann::json(*v) : nlohmann::json(nullptr);
}

int run_boards(Context& ctx, bool json) {
    auto archive = store::open_archive(ctx.db_path());
    const auto boards = archive->boards();
    if (json) {
        nlohmann::json list = nlohmann::json::array();
        for (const auto& b : boards) {
            nlohmann::json latest = nullptr;
            if (b.latest) {
                const auto& s = *b.latest;
                latest = {{"session", s.session.id},
                          {"kind", store::to_string(s.session.kind)},
                          {"status", store::to_string(s.session.status)},
                          {"started", s.session.started_utc},
                          {"points", s.point_count},
                          {"midband_gain_db", number_or_null(s.midband_gain_db)},
                          {"f_low_hz", number_or_null(s.f_low_hz)},
                          {"f_high_hz", number_or_null(s.f_high_hz)}};
            }
            list.push_back({{"serial", b.board.serial},
                            {"design", b.board.design_address.empty()
                                           ? nlohmann::json(nullptr)
                                           : nlohmann::json(b.board.design_address)},
                            {"notes", b.board.notes},
                            {"sessions", b.session_count},
                            {"latest", latest}});
        }
        nlohmann::json doc = {{"boards", list}};
        ctx.out << doc.dump(2, ' ', false, nlohmann::json::error_handler_t::replace) << "\n";
        return 0;
    }
    if (boards.empty()) {
        ctx.out << "no boards in " << ctx.db_path() << "\n";
        return 0;
    }
    ctx.out << fmt::format("{:<20}  {:>8}  {:<20}  {:<11}  {:>10}  {:>10}  {:>10}\n", "board",
                           "sessions", "latest", "status", "midband", "f_low", "f_high");
    for (const auto& b : boards) {
        std::string started = "-", status = "-", gain = "-", low = "-", high = "-";
        if (b.latest) {
            const auto& s = *b.latest;
            started = s.session.started_utc;
            status = store::to_string(s.session.status);
            if (s.midband_gain_db) gain = fmt::format("{:.2f} dB", *s.midband_gain_db);
            if (s.f_low_hz) low = format_eng(*s.f_low_hz, "Hz", 3);
            if (s.f_high_hz) high = format_eng(*s.f_high_hz, "Hz", 3);
        }
        ctx.out << fmt::format("{:<20}  {:>8}  {:<20}  {:<11}  {:>10}  {:>10}  {:>10}\n",
                               b.board.serial, b.session_count, started, status, gain, low,
                               high);
    }
    return 0;
}

}  // namespace

void add_boards_command(CLI::App& app, Context& ctx) {
    auto json = std::make_shared<bool>(false);
    auto* cmd = app.add_subcommand("boards", "Every board in the archive with its latest result");
    cmd->add_flag("--json", *json, "Print JSON instead of a table");
    cmd->callback([json, &ctx] { ctx.action = [json, &ctx] { return run_boards(ctx, *json); }; });
}

}  // namespace ampbench::cli

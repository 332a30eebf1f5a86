// `ampbench report SESSION [--html FILE]`: a sweep session's gap table and diagnosis on the
// terminal, or one self-contained HTML file.
#include <fstream>

#include <CLI/CLI.hpp>
#include <fmt/format.h>

#include "cli/commands.h"
#include "cli/procedures/sweep.h"
#include "cli/report/html_report.h"
#include "cli/report/terminal.h"
#include "core/errors.h"
#include "store/archive.h"

namespace ampbench::cli {
namespace {

struct ReportArgs {
    std::int64_t session = 0;
    std::string html;
};

int run_report(Context& ctx, const ReportArgs& a) {
    auto archive = store::open_archive(ctx.db_path());
    if (!archive->session(a.session)) throw InputError(ctx.db_path(), "SESSION", fmt::format("no session {} in the archive", a.session));
    const store::SessionDetail detail = archive->session_detail(a.session);
    if (detail.session.kind == store::SessionKind::match) {
        if (!a.html.empty()) throw InputError(ctx.db_path(), "SESSION", fmt::format("session {} is a channel-match run; --html is for sweeps", a.session));
        std::vector<procedures::MatchRow> rows;
        for (const store::Point& p : detail.points)
            if (!p.superseded_by)
                rows.push_back(procedures::match_row(p));
        ctx.out << fmt::format("match session {} · {} · {} · taken {}\n", detail.session.id, detail.session.board_serial,
                               store::to_string(detail.session.status), detail.session.started_utc)
                << report::match_table(rows);
        return 0;
    }
    const procedures::SessionAnalysis analysis = procedures::analyse_session(*archive, a.session);
    if (!a.html.empty()) {
        const std::string text = report::html_report(detail, analysis);
        // Written beside the target and renamed, so a failure leaves no partial file.
        const std::string tmp = a.html + ".part";
        {
            std::ofstream f(tmp, std::ios::binary | std::ios::trunc);
            if (!f) throw InputError(a.html, "--html", "cannot write the file");
            f << text;
            if (!f.flush()) throw InputError(a.html, "--html", "cannot write the file");
        }
        if (std::rename(tmp.c_str(), a.html.c_str()) != 0) throw InputError(a.html, "--html", "cannot write the file");
        ctx.out << "report written to " << a.html << "\n";
        return 0;
    }
    ctx.out << fmt::format("session {} · board {} · {}\n", detail.session.id, detail.session.board_serial, store::to_string(detail.session.status));
    ctx.out << report::readings_text(analysis) << analysis.fit.brief() << "\n\n" << report::gap_table(analysis.gap);
    if (!analysis.diagnosis.empty()) ctx.out << "\n" << report::diagnosis_text(analysis.diagnosis);
    return 0;
}

}  // namespace

void add_report_command(CLI::App& app, Context& ctx) {
    auto args = std::make_shared<ReportArgs>();
    CLI::App* c = app.add_subcommand("report", "Summarise a sweep session, or write it as one HTML file");
    c->add_option("SESSION", args->session, "Session number")->required();
    c->add_option("--html", args->html, "Write a self-contained HTML report to FILE");
    c->callback([&ctx, args] { ctx.action = [&ctx, args] { return run_report(ctx, *args); }; });
}

}  // namespace ampbench::cli

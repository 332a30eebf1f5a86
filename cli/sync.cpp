// `ampbench sync --from SQLITE_FILE --to LOCATION [--dry-run] [--json]`: pushes everything a
// station's archive holds that the destination lacks — designs (by content address), boards,
// sessions with their readings and fits, lots with their devices — and prints what moved per
// table. Each session and each lot is one transaction at the destination, so an interrupted
// sync leaves whole sessions and a rerun completes it; a second run moves nothing.
#include <unistd.h>

#include <chrono>
#include <cstdlib>
#include <filesystem>
#include <iostream>
#include <map>
#include <optional>
#include <set>
#include <thread>

#include <CLI/CLI.hpp>
#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "cli/commands.h"
#include "core/errors.h"
#include "store/archive.h"
#include "store/sync_rules.h"

namespace ampbench::cli {
namespace {

struct SyncOptions {
    std::string from, to;
    bool dry_run = false;
    bool json = false;
};

// What moved (or would move), per table.
struct Moved {
    std::int64_t designs = 0, boards = 0;
    store::CopyCounts rows;
    std::int64_t status_updates = 0;  // sessions and lots whose status was brought up to date

    std::int64_t total() const {
        return designs + boards + rows.sessions + rows.instruments + rows.probes +
               rows.plan_points + rows.points + rows.fits + rows.lots + rows.devices;
    }
    std::vector<std::pair<const char*, std::int64_t>> tables() const {
        return {{"designs", designs},         {"boards", boards},
                {"sessions", rows.sessions},  {"instruments", rows.instruments},
                {"probes", rows.probes},      {"plan_points", rows.plan_points},
                {"points", rows.points},      {"fits", rows.fits},
                {"lots", rows.lots},          {"devices", rows.devices}};
    }
};

struct Skipped {
    std::string what;  // "session 4" or "lot LOT-..."
    std::string uuid;
    std::string reason;
};

// A SQLite file named by a path or "sqlite:PATH"; nullopt for a URL of another backend.
std::optional<std::string> sqlite_path(const std::string& location) {
    std::string path = location;
    if (path.rfind("sqlite:", 0) == 0) {
        path = path.substr(7);
        if (path.rfind("//", 0) == 0) path = path.substr(2);
        return path;
    }
    if (path.find("://") != std::string::npos) return std::nullopt;
    return path;
}

bool same_file(const std::string& a, const std::string& b) {
    namespace fs = std::filesystem;
    std::error_code ec;
    if (fs::exists(a, ec) && fs::exists(b, ec)) return fs::equivalent(a, b, ec);
    return fs::weakly_canonical(a, ec) == fs::weakly_canonical(b, ec);
}

// Test hook: AMPBENCH_SYNC_PAUSE_MS=N sleeps N ms after each session committed at the
// destination, so a test can kill the sync between sessions at a moment it chooses.
int pause_ms() {
    const char* env = std::getenv("AMPBENCH_SYNC_PAUSE_MS");
    if (!env || !*env) return 0;
    try {
        return std::max(0, std::stoi(env));
    } catch (const std::exception&) {
        throw UsageError(fmt::format("AMPBENCH_SYNC_PAUSE_MS: '{}' is not a number of ms", env));
    }
}

// The rows of `from` (a session detail) that `here` lacks: plan points by index, readings and
// fits by UUID. `here` is empty when the session is not at the destination.
store::CopyCounts missing_rows(const store::SessionDetail& from,
                               const std::optional<store::SessionDetail>& here) {
    store::CopyCounts c;
    if (!here) {
        c.sessions = 1;
        c.instruments = static_cast<std::int64_t>(from.instruments.size());
        c.probes = static_cast<std::int64_t>(from.probes.size());
        c.plan_points = static_cast<std::int64_t>(from.plan.size());
        c.points = static_cast<std::int64_t>(from.points.size());
        c.fits = static_cast<std::int64_t>(from.fits.size());
        return c;
    }
    std::set<std::int64_t> plan;
    for (const auto& p : here->plan) plan.insert(p.index);
    std::set<std::string> uuids;
    for (const auto& p : here->points) uuids.insert(p.uuid);
    for (const auto& f : here->fits) uuids.insert(f.uuid);
    for (const auto& p : from.plan) c.plan_points += plan.count(p.index) ? 0 : 1;
    for (const auto& p : from.points) c.points += uuids.count(p.uuid) ? 0 : 1;
    for (const auto& f : from.fits) c.fits += uuids.count(f.uuid) ? 0 : 1;
    return c;
}

bool nothing(const store::CopyCounts& c) {
    return c.sessions + c.instruments + c.probes + c.plan_points + c.points + c.fits + c.lots +
               c.devices ==
           0;
}

class Sync {
public:
    Sync(const SyncOptions& o, Context& ctx, store::Archive& source, store::Archive* dest)
        : o_(o), ctx_(ctx), src_(source), dest_(dest), pause_ms_(pause_ms()) {}

    void run() {
        const std::vector<store::Session> sessions = src_.sessions();
        const bool progress = !o_.json && &ctx_.err == &std::cerr && ::isatty(STDERR_FILENO);
        std::set<std::int64_t> skipped_sessions;
        for (std::size_t i = 0; i < sessions.size(); ++i) {
            if (progress)
                ctx_.err << fmt::format("\rchecking session {}/{}", i + 1, sessions.size())
                         << std::flush;
            const store::Session& s = sessions[i];
            if (s.status == store::SessionStatus::running) {
                skipped_sessions.insert(s.id);
                skip({fmt::format("session {}", s.id), s.uuid,
                      fmt::format("still running (pid {} on {}); it moves once it has finished or "
                                  "been interrupted",
                                  s.pid, s.host)});
                continue;
            }
            sync_session(s, progress);
        }
        if (progress) ctx_.err << "\r\033[K" << std::flush;
        for (const auto& b : src_.boards()) sync_board(b.board);
        for (const auto& lot : src_.lots()) {
            if (lot.session_id && skipped_sessions.count(*lot.session_id)) {
                skip({"lot " + lot.lot_code, lot.uuid,
                      fmt::format("its session {} is still running", *lot.session_id)});
                continue;
            }
            sync_lot(lot);
        }
    }

    const Moved& moved() const { return moved_; }
    const std::vector<Skipped>& skipped() const { return skipped_; }

private:
    void skip(Skipped s) {
        if (!o_.json) ctx_.out << fmt::format("skipped {} ({}): {}\n", s.what, s.uuid, s.reason);
        skipped_.push_back(std::move(s));
    }

    void sync_design(const std::string& address) {
        if (address.empty() || designs_done_.count(address)) return;
        designs_done_.insert(address);
        if (dest_ && dest_->design(address)) return;
        const auto rec = src_.design(address);
        if (!rec)
            throw StoreError(fmt::format("archive {}: a board names design {} but it is not stored",
                                         src_.location(), address));
        ++moved_.designs;
        if (o_.dry_run) return;
        const store::DesignRecord got =
            dest_->put_design(rec->canonical_json, fmt::format("design {} from {}", address, src_.location()));
        if (got.address != address)
            throw StoreError(fmt::format(
                "archive {}: design {} was stored under a different address ({}); the two "
                "builds disagree on canonical JSON",
                dest_->location(), address, got.address));
    }

    void sync_board(const store::Board& b) {
        if (boards_done_.count(b.serial)) return;
        boards_done_.insert(b.serial);
        sync_design(b.design_address);
        const auto here = dest_ ? dest_->board(b.serial) : std::nullopt;
        if (!here) ++moved_.boards;
        if (o_.dry_run) return;
        // A board known here without a design learns it; notes are not overwritten.
        if (!here || (here->design_address.empty() && !b.design_address.empty()))
            dest_->ensure_board(b.serial, b.design_address, here ? std::string() : b.notes);
    }

    void sync_session(const store::Session& s, bool progress) {
        const store::SessionDetail detail = src_.session_detail(s.id);
        if (detail.board) sync_board(*detail.board);
        std::optional<store::SessionDetail> here;
        if (dest_)
            if (const auto found = dest_->session_by_uuid(s.uuid))
                here = dest_->session_detail(found->id);
        const store::CopyCounts missing = missing_rows(detail, here);
        const bool status_differs =
            here && store::session_status_is_newer(s, here->session.status,
                                                   here->session.finished_utc);
        if (nothing(missing) && !status_differs) return;
        store::CopyCounts added = missing;
        if (!o_.dry_run) added = dest_->copy_session(detail);
        moved_.rows += added;
        if (nothing(added)) {
            if (o_.dry_run || status_differs) ++moved_.status_updates;
            return;
        }
        if (o_.json) return;
        if (progress) ctx_.err << "\r\033[K";
        ctx_.out << fmt::format("{} session {} ({}, board {}, {}): {}{} points, {}{} fits{}\n",
                                o_.dry_run ? "would sync" : "synced", s.id, s.uuid,
                                s.board_serial, store::to_string(s.status),
                                added.sessions ? "" : "+", added.points,
                                added.sessions ? "" : "+", added.fits,
                                added.sessions ? "" : " to the copy already there");
        ctx_.out << std::flush;
        if (!o_.dry_run && pause_ms_ > 0)
            std::this_thread::sleep_for(std::chrono::milliseconds(pause_ms_));
    }

    void sync_lot(const store::Lot& lot) {
        std::string session_uuid;
        if (lot.session_id)
            if (const auto s = src_.session(*lot.session_id)) session_uuid = s->uuid;
        const std::vector<store::Device> devices = src_.devices(lot.id);
        const auto here = dest_ ? dest_->lot(lot.lot_code) : std::nullopt;
        if (here && here->uuid != lot.uuid)
            throw StoreError(fmt::format(
                "archive {}: lot code {} is used there by another lot ({}, here {}); rename one "
                "of them",
                dest_->location(), lot.lot_code, here->uuid, lot.uuid));
        store::CopyCounts missing;
        if (!here) {
            missing.lots = 1;
            missing.devices = static_cast<std::int64_t>(devices.size());
        } else {
            std::set<std::string> uuids;
            for (const auto& d : dest_->devices(here->id)) uuids.insert(d.uuid);
            for (const auto& d : devices) missing.devices += uuids.count(d.uuid) ? 0 : 1;
        }
        const bool status_differs = here && store::lot_status_is_newer(lot.status, here->status);
        if (nothing(missing) && !status_differs) return;
        store::CopyCounts added = missing;
        if (!o_.dry_run) added = dest_->copy_lot(lot, session_uuid, devices);
        moved_.rows += added;
        if (nothing(added)) {
            if (o_.dry_run || status_differs) ++moved_.status_updates;
            return;
        }
        if (!o_.json)
            ctx_.out << fmt::format("{} lot {} ({}): {} devices\n",
                                    o_.dry_run ? "would sync" : "synced", lot.lot_code, lot.uuid,
                                    added.devices)
                     << std::flush;
    }

    const SyncOptions& o_;
    Context& ctx_;
    store::Archive& src_;
    store::Archive* dest_;  // null in a dry run to a SQLite file that does not exist yet
    int pause_ms_ = 0;
    std::set<std::string> designs_done_, boards_done_;
    Moved moved_;
    std::vector<Skipped> skipped_;
};

void print_report(const SyncOptions& o, Context& ctx, const std::string& source,
                  const std::string& dest, const Sync& sync) {
    const Moved& m = sync.moved();
    if (o.json) {
        nlohmann::ordered_json doc;
        doc["source"] = source;
        doc["destination"] = dest;
        doc["dry_run"] = o.dry_run;
        nlohmann::ordered_json tables = nlohmann::ordered_json::object();
        for (const auto& [name, n] : m.tables()) tables[name] = n;
        doc[o.dry_run ? "would_move" : "moved"] = tables;
        doc["status_updates"] = m.status_updates;
        doc["up_to_date"] = m.total() == 0 && m.status_updates == 0;
        doc["skipped"] = nlohmann::ordered_json::array();
        for (const auto& s : sync.skipped())
            doc["skipped"].push_back({{"what", s.what}, {"uuid", s.uuid}, {"reason", s.reason}});
        ctx.out << doc.dump(2, ' ', false, nlohmann::json::error_handler_t::replace) << "\n";
        return;
    }
    if (m.total() == 0 && m.status_updates == 0) {
        ctx.out << fmt::format("nothing to move: {} already has everything in {}{}\n", dest,
                               source, sync.skipped().empty() ? "" : " (but see the skipped above)");
        return;
    }
    ctx.out << fmt::format("\n{:<12}  {:>10}\n", "table", o.dry_run ? "would move" : "moved");
    for (const auto& [name, n] : m.tables()) ctx.out << fmt::format("{:<12}  {:>10}\n", name, n);
    if (m.status_updates > 0)
        ctx.out << fmt::format("{} {} with only a newer status\n", m.status_updates,
                               m.status_updates == 1 ? "record" : "records");
    ctx.out << fmt::format("{} {} rows{}\n", o.dry_run ? "dry run: would move" : "moved",
                           m.total(), o.dry_run ? "; nothing was written" : " to " + dest);
}

int run_sync(const SyncOptions& o, Context& ctx) {
    const auto source_path = sqlite_path(o.from);
    if (!source_path || source_path->empty())
        throw UsageError(fmt::format(
            "sync: --from takes a station's SQLite archive file, not '{}'", o.from));
    std::error_code ec;
    if (!std::filesystem::is_regular_file(*source_path, ec))
        throw InputError(*source_path, "", "no such archive file (sync --from)");
    const auto dest_path = sqlite_path(o.to);
    if (dest_path && dest_path->empty()) throw UsageError("sync: --to is empty");
    if (dest_path && same_file(*source_path, *dest_path))
        throw UsageError(fmt::format("sync: --from and --to are the same archive ({})", o.from));

    auto source = store::open_archive(*source_path);
    std::unique_ptr<store::Archive> dest;
    // A dry run creates nothing: a SQLite file that does not exist yet counts as empty.
    const bool absent_file = dest_path && !std::filesystem::exists(*dest_path, ec);
    if (!(o.dry_run && absent_file)) {
        try {
            dest = store::open_archive(o.to);
        } catch (const StoreError& e) {
            throw StoreError(fmt::format("sync: cannot open the destination {}: {}", o.to, e.what()));
        }
    }
    Sync sync(o, ctx, *source, dest.get());
    sync.run();
    print_report(o, ctx, source->location(), dest ? dest->location() : o.to, sync);
    return 0;
}

}  // namespace

void add_sync_command(CLI::App& app, Context& ctx) {
    auto o = std::make_shared<SyncOptions>();
    auto* cmd = app.add_subcommand(
        "sync", "Push everything a station's archive holds that another archive lacks");
    cmd->add_option("--from", o->from, "The station's archive (a SQLite file)")->required();
    cmd->add_option("--to", o->to, "The destination archive: a SQLite file or a URL")->required();
    cmd->add_flag("--dry-run", o->dry_run, "Count what would move and write nothing");
    cmd->add_flag("--json", o->json, "Print the counts as JSON");
    cmd->callback([o, &ctx] { ctx.action = [o, &ctx] { return run_sync(*o, ctx); }; });
}

}  // namespace ampbench::cli

// The SQLite backend of Archive (SQLiteCpp kept behind a pimpl): WAL journal, foreign keys,
// a busy timeout, and every write in an IMMEDIATE transaction so concurrent stations queue
// instead of failing with SQLITE_BUSY.
#pragma once

#include <memory>
#include <string>

#include "store/archive.h"

namespace ampbench::store {

class SqliteArchive final : public Archive {
public:
    // Opens or creates the file, migrates it, and marks stale sessions interrupted.
    SqliteArchive(const std::string& path, const ArchiveOptions& options);
    ~SqliteArchive() override;
    SqliteArchive(const SqliteArchive&) = delete;
    SqliteArchive& operator=(const SqliteArchive&) = delete;

    // The SQL of history(), with one parameter (the serial); for query-plan tests.
    static const char* history_query();

    const std::string& location() const override;
    int schema_version() const override;

    DesignRecord put_design(const std::string& design_json, const std::string& origin) override;
    std::optional<DesignRecord> design(const std::string& address) override;

    Board ensure_board(const std::string& serial, const std::string& design_address,
                       const std::string& notes) override;
    std::optional<Board> board(const std::string& serial) override;
    std::vector<BoardSummary> boards() override;

    Session begin_session(const NewSession& session) override;
    Session import_session(const NewSession& session, const std::vector<Point>& points) override;
    std::optional<Session> session(std::int64_t id) override;
    void heartbeat(std::int64_t session_id) override;
    void finish_session(std::int64_t session_id, SessionStatus status) override;
    int mark_stale_sessions() override;
    ResumeState resume_session(std::int64_t session_id) override;

    void add_plan_points(std::int64_t session_id, const std::vector<PlanPoint>& plan) override;
    std::vector<PlanPoint> plan(std::int64_t session_id) override;

    Point append_point(std::int64_t session_id, const Point& point) override;
    std::vector<Point> append_points(std::int64_t session_id,
                                     const std::vector<Point>& points) override;
    std::vector<Point> current_points(std::int64_t session_id) override;

    FitRecord add_fit(const FitRecord& fit) override;
    std::vector<FitRecord> fits(std::int64_t session_id) override;

    Lot add_lot(const Lot& lot) override;
    std::optional<Lot> lot(const std::string& lot_code) override;
    std::vector<Lot> lots() override;
    void set_lot_status(std::int64_t lot_id, const std::string& status) override;
    Device add_device(const Device& device) override;
    std::vector<Device> devices(std::int64_t lot_id) override;

    std::vector<SessionSummary> history(const std::string& serial) override;
    SessionDetail session_detail(std::int64_t session_id) override;

    // Defined in sqlite_sync.cpp.
    std::vector<Session> sessions() override;
    std::optional<Session> session_by_uuid(const std::string& uuid) override;
    CopyCounts copy_session(const SessionDetail& detail) override;
    CopyCounts copy_lot(const Lot& lot, const std::string& session_uuid,
                        const std::vector<Device>& devices) override;

private:
    struct Impl;
    std::unique_ptr<Impl> impl_;
};

}  // namespace ampbench::store

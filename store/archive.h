// The archive interface every command uses: plain records of std types and one abstract Archive,
// so a second backend (a shared PostgreSQL archive) can be added without touching the commands.
#pragma once

#include <cstdint>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <vector>

namespace ampbench::store {

// A design, content-addressed by the SHA-256 of its canonical JSON.
struct DesignRecord {
    std::string address;         // lowercase hex SHA-256 of canonical_json
    std::string name;            // the design's "name" field, if any
    std::string canonical_json;  // keys sorted, no whitespace
    std::string created_utc;
};

struct Board {
    std::int64_t id = 0;
    std::string serial;
    std::string design_address;  // empty when the board's design is not known
    std::string notes;
    std::string created_utc;
};

// One instrument as used in a session: its identity (*IDN? reply), asset id, role, URI,
// calibration and the settings it was used with (JSON text).
struct InstrumentRecord {
    std::string role;  // generator, scope, meter, supply, jig
    std::string identity;
    std::string asset;
    std::string uri;
    std::string cal_due;  // ISO date, may be empty
    std::string certificate;
    std::string settings_json = "{}";
};

struct ProbeRecord {
    std::string name;     // probe name of the design ("in", "out")
    std::string channel;  // scope channel it sits on
    std::string asset;
    double ratio = 1.0;
    std::string cal_due;
    std::string certificate;
};

enum class SessionKind { sweep, dc, match, lot, import };
enum class SessionStatus { running, complete, interrupted, aborted };

const char* to_string(SessionKind kind);
const char* to_string(SessionStatus status);
// StoreError on an unknown word (a damaged or foreign archive).
SessionKind session_kind_from(const std::string& text);
SessionStatus session_status_from(const std::string& text);

// What a procedure knows when it starts a session.
struct NewSession {
    std::string board_serial;    // the board is created when new
    std::string design_address;  // when set, recorded as the board's design (must be stored)
    SessionKind kind = SessionKind::sweep;
    std::string operator_name;
    std::string bench_file;
    std::string notes;
    std::vector<InstrumentRecord> instruments;
    std::vector<ProbeRecord> probes;
};

struct Session {
    std::int64_t id = 0;
    std::string uuid;
    std::string board_serial;
    SessionKind kind = SessionKind::sweep;
    SessionStatus status = SessionStatus::running;
    std::string started_utc;
    std::string finished_utc;  // empty while running
    std::string operator_name;
    std::string host;
    std::int64_t pid = 0;
    double heartbeat_unix_s = 0.0;
    std::string bench_file;
    std::string software_version;
    std::string notes;
};

// A frequency a sweep plans to visit; adaptive points are added as they are chosen.
struct PlanPoint {
    std::int64_t index = 0;  // unique within the session
    double freq_hz = 0.0;
    bool adaptive = false;
};

// One reading of the scope's two channels at one frequency, and the gain derived from it.
// Amplitudes are peak volts; optional fields are unknown for imported or magnitude-only data.
struct Point {
    std::int64_t id = 0;        // set by the archive
    std::string uuid;           // set by the archive
    std::int64_t sequence = 0;  // set by the archive: 1, 2, ... in order of taking
    std::optional<std::int64_t> plan_index;
    double freq_hz = 0.0;
    std::optional<double> in_amplitude_v, in_amplitude_sd_v, in_phase_deg, in_phase_sd_deg;
    std::optional<double> out_amplitude_v, out_amplitude_sd_v, out_phase_deg, out_phase_sd_deg;
    double gain_db = 0.0;
    std::optional<double> gain_db_sd, phase_deg, phase_deg_sd;
    std::optional<double> thd_pct;
    std::string flags;                  // comma-separated words ("clipped,unsettled")
    std::string settings_json = "{}";  // instrument settings at this point
    std::string taken_utc;             // set by the archive when empty
    std::optional<std::int64_t> superseded_by;  // id of the retaken reading
};

struct FitRecord {
    std::int64_t id = 0;
    std::string uuid;
    std::int64_t session_id = 0;
    std::string kind;   // "response", "dc", ...
    std::string model;  // model name
    std::string params_json = "{}";
    std::string report_json = "{}";
    // Headline results, kept as columns so history needs no JSON parsing.
    std::optional<double> midband_gain_db, f_low_hz, f_high_hz;
    std::string created_utc;
};

struct Lot {
    std::int64_t id = 0;
    std::string uuid;
    std::string lot_code;  // "LOT-2611-BC1"
    std::string plan_json = "{}";
    std::int64_t quantity = 0;
    std::string supplier;
    std::string status = "open";  // open, accepted, rejected
    std::optional<std::int64_t> session_id;
    std::string created_utc;
};

struct Device {
    std::int64_t id = 0;
    std::string uuid;
    std::int64_t lot_id = 0;
    std::int64_t index = 0;  // position in the lot's sample
    std::string readings_json = "{}";
    std::optional<double> hfe, hfe_sd, vbe_v, vbe_sd_v, ic_a, ic_sd_a, vce_v, vce_sd_v;
    std::optional<bool> passed;
    std::string skipped_reason;
    std::optional<std::int64_t> replacement_of;  // device id this one replaces
};

// What a sweep needs to continue where it stopped.
struct ResumeState {
    Session session;
    std::vector<PlanPoint> plan;
    std::vector<Point> points;  // current (not superseded) readings, in sequence order
};

// One line of a board's history.
struct SessionSummary {
    Session session;
    std::int64_t point_count = 0;  // current readings
    std::vector<InstrumentRecord> instruments;
    std::optional<double> midband_gain_db, f_low_hz, f_high_hz;  // of the latest fit
};

struct BoardSummary {
    Board board;
    std::int64_t session_count = 0;
    std::optional<SessionSummary> latest;
};

// Everything about one session, superseded readings included (for export).
struct SessionDetail {
    Session session;
    std::optional<Board> board;
    std::vector<InstrumentRecord> instruments;
    std::vector<ProbeRecord> probes;
    std::vector<PlanPoint> plan;
    std::vector<Point> points;  // all readings, in sequence order
    std::vector<FitRecord> fits;
};

struct ArchiveOptions {
    // Seconds since the Unix epoch; tests move it to age heartbeats.
    std::function<double()> clock_unix_s;
    // This process as recorded in new sessions; empty/0 mean gethostname()/getpid().
    std::string host;
    std::int64_t pid = 0;
    double heartbeat_every_s = 5.0;
    double stale_after_s = 15.0;
    int busy_timeout_ms = 30000;
};

// Rows one copy_session/copy_lot call added, per table (zero everywhere when nothing moved).
struct CopyCounts {
    std::int64_t sessions = 0, instruments = 0, probes = 0, plan_points = 0, points = 0,
                 fits = 0, lots = 0, devices = 0;
    CopyCounts& operator+=(const CopyCounts& other);  // defined in store/copy_counts.cpp
};

// The archive. Every write is its own transaction, committed before the call returns.
// Errors are StoreError naming the archive.
class Archive {
public:
    virtual ~Archive() = default;

    // Where this archive lives (a path or URL), as given to open_archive.
    virtual const std::string& location() const = 0;
    virtual int schema_version() const = 0;

    // Designs: stores the canonical form of `design_json` and returns its address. `origin`
    // names the text in errors. Storing the same design twice is harmless.
    virtual DesignRecord put_design(const std::string& design_json, const std::string& origin) = 0;
    virtual std::optional<DesignRecord> design(const std::string& address) = 0;

    // Boards: created when first named; a non-empty design/notes updates the board.
    virtual Board ensure_board(const std::string& serial, const std::string& design_address = {},
                               const std::string& notes = {}) = 0;
    virtual std::optional<Board> board(const std::string& serial) = 0;
    virtual std::vector<BoardSummary> boards() = 0;

    // Sessions.
    virtual Session begin_session(const NewSession& session) = 0;
    // A finished session with all its readings in one transaction: all of it or nothing.
    virtual Session import_session(const NewSession& session, const std::vector<Point>& points) = 0;
    virtual std::optional<Session> session(std::int64_t id) = 0;
    virtual void heartbeat(std::int64_t session_id) = 0;
    virtual void finish_session(std::int64_t session_id, SessionStatus status) = 0;
    // Marks stale running sessions interrupted (also done on open); returns how many.
    virtual int mark_stale_sessions() = 0;
    // Takes over an interrupted session for this process; StoreError when it is complete,
    // aborted or still running.
    virtual ResumeState resume_session(std::int64_t session_id) = 0;

    // The plan; indexes must be new within the session.
    virtual void add_plan_points(std::int64_t session_id, const std::vector<PlanPoint>& plan) = 0;
    virtual std::vector<PlanPoint> plan(std::int64_t session_id) = 0;

    // Appends one reading, committed before returning; a reading for a planned point that
    // already has a current reading supersedes it. Also beats the heartbeat when due.
    virtual Point append_point(std::int64_t session_id, const Point& point) = 0;
    // Appends several readings in one transaction.
    virtual std::vector<Point> append_points(std::int64_t session_id,
                                             const std::vector<Point>& points) = 0;
    virtual std::vector<Point> current_points(std::int64_t session_id) = 0;

    virtual FitRecord add_fit(const FitRecord& fit) = 0;
    virtual std::vector<FitRecord> fits(std::int64_t session_id) = 0;

    virtual Lot add_lot(const Lot& lot) = 0;
    virtual std::optional<Lot> lot(const std::string& lot_code) = 0;
    // Every lot, oldest first.
    virtual std::vector<Lot> lots() = 0;
    virtual void set_lot_status(std::int64_t lot_id, const std::string& status) = 0;
    virtual Device add_device(const Device& device) = 0;
    virtual std::vector<Device> devices(std::int64_t lot_id) = 0;

    // Every session of a board, newest first. StoreError-free: an unknown serial gives none.
    virtual std::vector<SessionSummary> history(const std::string& serial) = 0;
    virtual SessionDetail session_detail(std::int64_t session_id) = 0;

    // --- Moving records between archives (sync). Records keep their UUIDs; ids are this
    // archive's own and are never copied. ---
    // Every session, oldest first (by id).
    virtual std::vector<Session> sessions() = 0;
    virtual std::optional<Session> session_by_uuid(const std::string& uuid) = 0;
    // Writes a session read from another archive (its session_detail) in one transaction,
    // keeping every UUID. The board (and its design) must be stored here first. When a session
    // with that UUID exists here already, only the plan points (by index), readings and fits
    // (by UUID) it lacks are added, and its status / finished time are brought up to date.
    // superseded_by is mapped through the readings' UUIDs. Returns the rows added.
    virtual CopyCounts copy_session(const SessionDetail& detail) = 0;
    // The same for a lot and its devices (replacement_of mapped through device UUIDs);
    // `session_uuid` names the lot's session in the other archive (empty: none; it must be
    // copied first). An existing lot (by UUID) gets only its missing devices and its status.
    virtual CopyCounts copy_lot(const Lot& lot, const std::string& session_uuid,
                                const std::vector<Device>& devices) = 0;
};

// Opens (creating and migrating as needed) the archive at `location`: a file path, or
// "sqlite:PATH". Other URL schemes are refused until their backend exists.
std::unique_ptr<Archive> open_archive(const std::string& location,
                                      const ArchiveOptions& options = {});

// The schema version this build writes.
int current_schema_version();

}  // namespace ampbench::store

// Migration 1 creates every table the product needs (in SQLite and in PostgreSQL), so later work adds columns, not tables.
// Rows that stations may one day exchange (sessions, points, fits, lots, devices) carry a UUID.
#include "store/schema.h"

#include "store/archive.h"

namespace ampbench::store {

namespace {

constexpr const char* migration_1 = R"sql(
CREATE TABLE schema_version (
    version     INTEGER PRIMARY KEY,
    applied_utc TEXT NOT NULL
);

CREATE TABLE designs (
    address        TEXT PRIMARY KEY,
    name           TEXT NOT NULL DEFAULT '',
    canonical_json TEXT NOT NULL,
    created_utc    TEXT NOT NULL
);

CREATE TABLE boards (
    id             INTEGER PRIMARY KEY,
    serial         TEXT NOT NULL UNIQUE,
    design_address TEXT REFERENCES designs(address),
    notes          TEXT NOT NULL DEFAULT '',
    created_utc    TEXT NOT NULL
);

CREATE TABLE sessions (
    id               INTEGER PRIMARY KEY,
    uuid             TEXT NOT NULL UNIQUE,
    board_id         INTEGER NOT NULL REFERENCES boards(id),
    kind             TEXT NOT NULL CHECK (kind IN ('sweep', 'dc', 'match', 'lot', 'import')),
    status           TEXT NOT NULL
                     CHECK (status IN ('running', 'complete', 'interrupted', 'aborted')),
    started_utc      TEXT NOT NULL,
    finished_utc     TEXT,
    operator         TEXT NOT NULL DEFAULT '',
    host             TEXT NOT NULL DEFAULT '',
    pid              INTEGER NOT NULL DEFAULT 0,
    heartbeat_unix_s REAL NOT NULL,
    bench_file       TEXT NOT NULL DEFAULT '',
    software_version TEXT NOT NULL DEFAULT '',
    notes            TEXT NOT NULL DEFAULT ''
);
CREATE INDEX sessions_by_board ON sessions(board_id, started_utc, id);
CREATE INDEX sessions_by_status ON sessions(status, heartbeat_unix_s);

CREATE TABLE instruments (
    id            INTEGER PRIMARY KEY,
    session_id    INTEGER NOT NULL REFERENCES sessions(id),
    role          TEXT NOT NULL,
    identity      TEXT NOT NULL DEFAULT '',
    asset         TEXT NOT NULL DEFAULT '',
    uri           TEXT NOT NULL DEFAULT '',
    cal_due       TEXT NOT NULL DEFAULT '',
    certificate   TEXT NOT NULL DEFAULT '',
    settings_json TEXT NOT NULL DEFAULT '{}'
);
CREATE INDEX instruments_by_session ON instruments(session_id);

CREATE TABLE probes (
    id          INTEGER PRIMARY KEY,
    session_id  INTEGER NOT NULL REFERENCES sessions(id),
    name        TEXT NOT NULL,
    channel     TEXT NOT NULL DEFAULT '',
    asset       TEXT NOT NULL DEFAULT '',
    ratio       REAL NOT NULL DEFAULT 1,
    cal_due     TEXT NOT NULL DEFAULT '',
    certificate TEXT NOT NULL DEFAULT ''
);
CREATE INDEX probes_by_session ON probes(session_id);

CREATE TABLE plan_points (
    session_id  INTEGER NOT NULL REFERENCES sessions(id),
    plan_index  INTEGER NOT NULL,
    freq_hz     REAL NOT NULL,
    adaptive    INTEGER NOT NULL DEFAULT 0,
    created_utc TEXT NOT NULL,
    PRIMARY KEY (session_id, plan_index)
);

CREATE TABLE points (
    id                 INTEGER PRIMARY KEY,
    uuid               TEXT NOT NULL UNIQUE,
    session_id         INTEGER NOT NULL REFERENCES sessions(id),
    sequence           INTEGER NOT NULL,
    plan_index         INTEGER,
    freq_hz            REAL NOT NULL,
    in_amplitude_v     REAL,
    in_amplitude_sd_v  REAL,
    in_phase_deg       REAL,
    in_phase_sd_deg    REAL,
    out_amplitude_v    REAL,
    out_amplitude_sd_v REAL,
    out_phase_deg      REAL,
    out_phase_sd_deg   REAL,
    gain_db            REAL NOT NULL,
    gain_db_sd         REAL,
    phase_deg          REAL,
    phase_deg_sd       REAL,
    thd_pct            REAL,
    flags              TEXT NOT NULL DEFAULT '',
    settings_json      TEXT NOT NULL DEFAULT '{}',
    taken_utc          TEXT NOT NULL,
    superseded_by      INTEGER REFERENCES points(id) DEFERRABLE INITIALLY DEFERRED,
    UNIQUE (session_id, sequence),
    FOREIGN KEY (session_id, plan_index) REFERENCES plan_points(session_id, plan_index)
);
-- At most one current reading per planned point: a retake supersedes the old one.
CREATE UNIQUE INDEX points_current_by_plan ON points(session_id, plan_index)
    WHERE superseded_by IS NULL AND plan_index IS NOT NULL;

CREATE TABLE fits (
    id              INTEGER PRIMARY KEY,
    uuid            TEXT NOT NULL UNIQUE,
    session_id      INTEGER NOT NULL REFERENCES sessions(id),
    kind            TEXT NOT NULL,
    model           TEXT NOT NULL DEFAULT '',
    params_json     TEXT NOT NULL DEFAULT '{}',
    report_json     TEXT NOT NULL DEFAULT '{}',
    midband_gain_db REAL,
    f_low_hz        REAL,
    f_high_hz       REAL,
    created_utc     TEXT NOT NULL
);
CREATE INDEX fits_by_session ON fits(session_id, id);

CREATE TABLE lots (
    id          INTEGER PRIMARY KEY,
    uuid        TEXT NOT NULL UNIQUE,
    lot_code    TEXT NOT NULL UNIQUE,
    plan_json   TEXT NOT NULL DEFAULT '{}',
    quantity    INTEGER NOT NULL DEFAULT 0,
    supplier    TEXT NOT NULL DEFAULT '',
    status      TEXT NOT NULL DEFAULT 'open',
    session_id  INTEGER REFERENCES sessions(id),
    created_utc TEXT NOT NULL
);

CREATE TABLE devices (
    id             INTEGER PRIMARY KEY,
    uuid           TEXT NOT NULL UNIQUE,
    lot_id         INTEGER NOT NULL REFERENCES lots(id),
    device_index   INTEGER NOT NULL,
    readings_json  TEXT NOT NULL DEFAULT '{}',
    hfe            REAL,
    hfe_sd         REAL,
    vbe_v          REAL,
    vbe_sd_v       REAL,
    ic_a           REAL,
    ic_sd_a        REAL,
    vce_v          REAL,
    vce_sd_v       REAL,
    passed         INTEGER,
    skipped_reason TEXT NOT NULL DEFAULT '',
    replacement_of INTEGER REFERENCES devices(id)
);
CREATE INDEX devices_by_lot ON devices(lot_id, device_index);
)sql";

// The same tables for PostgreSQL. Times stay ISO-8601 text so both backends return the same
// strings; the heartbeat stays seconds since the epoch.
constexpr const char* migration_1_postgres = R"sql(
CREATE TABLE schema_version (
    version     BIGINT PRIMARY KEY,
    applied_utc TEXT NOT NULL
);

CREATE TABLE designs (
    address        TEXT PRIMARY KEY,
    name           TEXT NOT NULL DEFAULT '',
    canonical_json TEXT NOT NULL,
    created_utc    TEXT NOT NULL
);

CREATE TABLE boards (
    id             BIGSERIAL PRIMARY KEY,
    serial         TEXT NOT NULL UNIQUE,
    design_address TEXT REFERENCES designs(address),
    notes          TEXT NOT NULL DEFAULT '',
    created_utc    TEXT NOT NULL
);

CREATE TABLE sessions (
    id               BIGSERIAL PRIMARY KEY,
    uuid             TEXT NOT NULL UNIQUE,
    board_id         BIGINT NOT NULL REFERENCES boards(id),
    kind             TEXT NOT NULL CHECK (kind IN ('sweep', 'dc', 'match', 'lot', 'import')),
    status           TEXT NOT NULL
                     CHECK (status IN ('running', 'complete', 'interrupted', 'aborted')),
    started_utc      TEXT NOT NULL,
    finished_utc     TEXT,
    operator         TEXT NOT NULL DEFAULT '',
    host             TEXT NOT NULL DEFAULT '',
    pid              BIGINT NOT NULL DEFAULT 0,
    heartbeat_unix_s DOUBLE PRECISION NOT NULL,
    bench_file       TEXT NOT NULL DEFAULT '',
    software_version TEXT NOT NULL DEFAULT '',
    notes            TEXT NOT NULL DEFAULT ''
);
CREATE INDEX sessions_by_board ON sessions(board_id, started_utc, id);
CREATE INDEX sessions_by_status ON sessions(status, heartbeat_unix_s);

CREATE TABLE instruments (
    id            BIGSERIAL PRIMARY KEY,
    session_id    BIGINT NOT NULL REFERENCES sessions(id),
    role          TEXT NOT NULL,
    identity      TEXT NOT NULL DEFAULT '',
    asset         TEXT NOT NULL DEFAULT '',
    uri           TEXT NOT NULL DEFAULT '',
    cal_due       TEXT NOT NULL DEFAULT '',
    certificate   TEXT NOT NULL DEFAULT '',
    settings_json TEXT NOT NULL DEFAULT '{}'
);
CREATE INDEX instruments_by_session ON instruments(session_id);

CREATE TABLE probes (
    id          BIGSERIAL PRIMARY KEY,
    session_id  BIGINT NOT NULL REFERENCES sessions(id),
    name        TEXT NOT NULL,
    channel     TEXT NOT NULL DEFAULT '',
    asset       TEXT NOT NULL DEFAULT '',
    ratio       DOUBLE PRECISION NOT NULL DEFAULT 1,
    cal_due     TEXT NOT NULL DEFAULT '',
    certificate TEXT NOT NULL DEFAULT ''
);
CREATE INDEX probes_by_session ON probes(session_id);

CREATE TABLE plan_points (
    session_id  BIGINT NOT NULL REFERENCES sessions(id),
    plan_index  BIGINT NOT NULL,
    freq_hz     DOUBLE PRECISION NOT NULL,
    adaptive    BOOLEAN NOT NULL DEFAULT FALSE,
    created_utc TEXT NOT NULL,
    PRIMARY KEY (session_id, plan_index)
);

CREATE TABLE points (
    id                 BIGSERIAL PRIMARY KEY,
    uuid               TEXT NOT NULL UNIQUE,
    session_id         BIGINT NOT NULL REFERENCES sessions(id),
    sequence           BIGINT NOT NULL,
    plan_index         BIGINT,
    freq_hz            DOUBLE PRECISION NOT NULL,
    in_amplitude_v     DOUBLE PRECISION,
    in_amplitude_sd_v  DOUBLE PRECISION,
    in_phase_deg       DOUBLE PRECISION,
    in_phase_sd_deg    DOUBLE PRECISION,
    out_amplitude_v    DOUBLE PRECISION,
    out_amplitude_sd_v DOUBLE PRECISION,
    out_phase_deg      DOUBLE PRECISION,
    out_phase_sd_deg   DOUBLE PRECISION,
    gain_db            DOUBLE PRECISION NOT NULL,
    gain_db_sd         DOUBLE PRECISION,
    phase_deg          DOUBLE PRECISION,
    phase_deg_sd       DOUBLE PRECISION,
    thd_pct            DOUBLE PRECISION,
    flags              TEXT NOT NULL DEFAULT '',
    settings_json      TEXT NOT NULL DEFAULT '{}',
    taken_utc          TEXT NOT NULL,
    superseded_by      BIGINT REFERENCES points(id) DEFERRABLE INITIALLY DEFERRED,
    UNIQUE (session_id, sequence),
    FOREIGN KEY (session_id, plan_index) REFERENCES plan_points(session_id, plan_index)
);
CREATE UNIQUE INDEX points_current_by_plan ON points(session_id, plan_index)
    WHERE superseded_by IS NULL AND plan_index IS NOT NULL;

CREATE TABLE fits (
    id              BIGSERIAL PRIMARY KEY,
    uuid            TEXT NOT NULL UNIQUE,
    session_id      BIGINT NOT NULL REFERENCES sessions(id),
    kind            TEXT NOT NULL,
    model           TEXT NOT NULL DEFAULT '',
    params_json     TEXT NOT NULL DEFAULT '{}',
    report_json     TEXT NOT NULL DEFAULT '{}',
    midband_gain_db DOUBLE PRECISION,
    f_low_hz        DOUBLE PRECISION,
    f_high_hz       DOUBLE PRECISION,
    created_utc     TEXT NOT NULL
);
CREATE INDEX fits_by_session ON fits(session_id, id);

CREATE TABLE lots (
    id          BIGSERIAL PRIMARY KEY,
    uuid        TEXT NOT NULL UNIQUE,
    lot_code    TEXT NOT NULL UNIQUE,
    plan_json   TEXT NOT NULL DEFAULT '{}',
    quantity    BIGINT NOT NULL DEFAULT 0,
    supplier    TEXT NOT NULL DEFAULT '',
    status      TEXT NOT NULL DEFAULT 'open',
    session_id  BIGINT REFERENCES sessions(id),
    created_utc TEXT NOT NULL
);

CREATE TABLE devices (
    id             BIGSERIAL PRIMARY KEY,
    uuid           TEXT NOT NULL UNIQUE,
    lot_id         BIGINT NOT NULL REFERENCES lots(id),
    device_index   BIGINT NOT NULL,
    readings_json  TEXT NOT NULL DEFAULT '{}',
    hfe            DOUBLE PRECISION,
    hfe_sd         DOUBLE PRECISION,
    vbe_v          DOUBLE PRECISION,
    vbe_sd_v       DOUBLE PRECISION,
    ic_a           DOUBLE PRECISION,
    ic_sd_a        DOUBLE PRECISION,
    vce_v          DOUBLE PRECISION,
    vce_sd_v       DOUBLE PRECISION,
    passed         BOOLEAN,
    skipped_reason TEXT NOT NULL DEFAULT '',
    replacement_of BIGINT REFERENCES devices(id)
);
CREATE INDEX devices_by_lot ON devices(lot_id, device_index);
)sql";

}  // namespace

const std::vector<Migration>& migrations() {
    static const std::vector<Migration> all = {{1, migration_1, migration_1_postgres}};
    return all;
}

int current_schema_version() { return migrations().back().version; }

}  // namespace ampbench::store

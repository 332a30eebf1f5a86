-- An archive as schema version 1 wrote it (sqlite3 .dump), the fixture for migrations from
-- version 1. Never edit: later migrations must open exactly this.
PRAGMA foreign_keys=OFF;
BEGIN TRANSACTION;
CREATE TABLE schema_version (
    version     INTEGER PRIMARY KEY,
    applied_utc TEXT NOT NULL
);
INSERT INTO schema_version VALUES(1,'2026-11-02T09:00:00Z');
CREATE TABLE designs (
    address        TEXT PRIMARY KEY,
    name           TEXT NOT NULL DEFAULT '',
    canonical_json TEXT NOT NULL,
    created_utc    TEXT NOT NULL
);
INSERT INTO designs VALUES('61f9a65f00e245a6e9ff6043a7aa83bff0aa4bd41a1bc93f9b08760cf75cc771','HVE-PA1 microphone preamp','{"format":"ampbench-design/1","name":"HVE-PA1 microphone preamp"}','2026-11-02T09:00:00Z');
CREATE TABLE boards (
    id             INTEGER PRIMARY KEY,
    serial         TEXT NOT NULL UNIQUE,
    design_address TEXT REFERENCES designs(address),
    notes          TEXT NOT NULL DEFAULT '',
    created_utc    TEXT NOT NULL
);
INSERT INTO boards VALUES(1,'PA1-2611-0042','61f9a65f00e245a6e9ff6043a7aa83bff0aa4bd41a1bc93f9b08760cf75cc771','first article','2026-11-02T09:00:00Z');
INSERT INTO boards VALUES(2,'SB3-2611-0007',NULL,'','2026-11-02T10:00:00Z');
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
INSERT INTO sessions VALUES(1,'7f3e2a10-5b1c-4d2e-9a6f-0c1d2e3f4a5b',1,'sweep','complete','2026-11-02T09:05:00Z','2026-11-02T09:12:00Z','J. Okafor','bench-3',4242,1793610720.0,'benches/bay3.bench.json','0.1.0','after rework');
INSERT INTO sessions VALUES(2,'1a2b3c4d-5e6f-4a1b-8c2d-3e4f5a6b7c8d',2,'import','complete','2026-11-02T10:01:00Z','2026-11-02T10:01:00Z','','bench-3',4300,1793613660.0,'','0.1.0','');
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
INSERT INTO instruments VALUES(1,1,'generator','HVE,SG-1,0001,1.0','GEN-07','tcp://192.0.2.10:5025','2027-03-31','CAL-1180','{"output_ohms":50}');
INSERT INTO instruments VALUES(2,1,'scope','HVE,SC-2,0002,2.1','SCP-02','serial:///dev/ttyUSB0?baud=115200','2027-01-15','','{}');
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
INSERT INTO probes VALUES(1,1,'in','1','PRB-11',10.0,'2027-02-01','');
INSERT INTO probes VALUES(2,1,'out','2','PRB-12',10.0,'2027-02-01','');
CREATE TABLE plan_points (
    session_id  INTEGER NOT NULL REFERENCES sessions(id),
    plan_index  INTEGER NOT NULL,
    freq_hz     REAL NOT NULL,
    adaptive    INTEGER NOT NULL DEFAULT 0,
    created_utc TEXT NOT NULL,
    PRIMARY KEY (session_id, plan_index)
);
INSERT INTO plan_points VALUES(1,0,20.0,0,'2026-11-02T09:05:00Z');
INSERT INTO plan_points VALUES(1,1,1000.0,0,'2026-11-02T09:05:00Z');
INSERT INTO plan_points VALUES(1,2,50000.0,0,'2026-11-02T09:05:00Z');
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
INSERT INTO points VALUES(1,'0b6d1f2e-3a4b-4c5d-8e6f-7a8b9c0d1e2f',1,1,0,20.0,0.050000000000000002775,0.00020000000000000000958,0.0,0.050000000000000002775,2.5099999999999997868,0.010000000000000000208,131.19999999999998863,0.29999999999999998889,34.00999999999999801,0.040000000000000000832,131.19999999999998863,0.29999999999999998889,0.2000000000000000111,'','{}','2026-11-02T09:06:00Z',2);
INSERT INTO points VALUES(2,'1c7e2a3f-4b5c-4d6e-9f7a-8b9c0d1e2f3a',1,2,0,20.0,0.050000000000000002775,0.00020000000000000000958,0.0,0.050000000000000002775,2.5,0.010000000000000000208,131.0,0.29999999999999998889,33.979999999999996873,0.040000000000000000832,131.0,0.29999999999999998889,0.2000000000000000111,'retake','{}','2026-11-02T09:07:00Z',NULL);
INSERT INTO points VALUES(3,'2d8f3b4a-5c6d-4e7f-a08b-9c0d1e2f3a4b',1,3,1,1000.0,0.050000000000000002775,0.00020000000000000000958,0.0,0.050000000000000002775,5.0199999999999995736,0.020000000000000000416,-179.09999999999999431,0.2000000000000000111,40.030000000000001136,0.029999999999999998889,-179.09999999999999431,0.2000000000000000111,0.10000000000000000555,'','{}','2026-11-02T09:08:00Z',NULL);
INSERT INTO points VALUES(4,'3e9a4c5b-6d7e-4f8a-b19c-0d1e2f3a4b5c',1,4,2,50000.0,0.050000000000000002775,0.00020000000000000000958,0.0,0.050000000000000002775,4.9800000000000004263,0.020000000000000000416,171.40000000000000568,0.2000000000000000111,39.960000000000000853,0.029999999999999998889,171.40000000000000568,0.2000000000000000111,0.10000000000000000555,'','{}','2026-11-02T09:09:00Z',NULL);
INSERT INTO points VALUES(5,'4fab5d6c-7e8f-4a9b-82ad-1e2f3a4b5c6d',2,1,NULL,1000.0,NULL,NULL,NULL,NULL,NULL,NULL,NULL,NULL,12.5,NULL,NULL,NULL,NULL,'imported','{}','2026-11-02T10:01:00Z',NULL);
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
INSERT INTO fits VALUES(1,'5abc6e7d-8f9a-4bac-93be-2f3a4b5c6d7e',1,'response','two-pole band-pass','{}','{}',40.009999999999998009,28.399999999999998578,191000.0,'2026-11-02T09:13:00Z');
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
INSERT INTO lots VALUES(1,'6bcd7f8e-9a0b-4cbd-a4cf-3a4b5c6d7e8f','LOT-2611-BC1','{"sample":2}',500,'Harrow Vale stores','accepted',NULL,'2026-11-03T08:00:00Z');
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
INSERT INTO devices VALUES(1,'7cde8a9f-0b1c-4dce-b5d0-4b5c6d7e8f9a',1,1,'{}',212.5,1.5,0.65200000000000002398,0.0010000000000000000208,0.0020000000000000000416,1.0000000000000000817e-05,5.0,0.010000000000000000208,1,'',NULL);
INSERT INTO devices VALUES(2,'8def9b0a-1c2d-4edf-86e1-5c6d7e8f9a0b',1,2,'{}',NULL,NULL,NULL,NULL,NULL,NULL,NULL,NULL,NULL,'bent lead',NULL);
CREATE INDEX sessions_by_board ON sessions(board_id, started_utc, id);
CREATE INDEX sessions_by_status ON sessions(status, heartbeat_unix_s);
CREATE INDEX instruments_by_session ON instruments(session_id);
CREATE INDEX probes_by_session ON probes(session_id);
CREATE UNIQUE INDEX points_current_by_plan ON points(session_id, plan_index)
    WHERE superseded_by IS NULL AND plan_index IS NOT NULL;
CREATE INDEX fits_by_session ON fits(session_id, id);
CREATE INDEX devices_by_lot ON devices(lot_id, device_index);
COMMIT;

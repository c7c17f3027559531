-- Schema version 1 of a veer database.
--
-- Conventions (see SCHEMA.md for the full description):
--   * times are REAL unix seconds, UTC;
--   * speeds are r/min;
--   * an nX vector is stored as `amplitude` (in the channel's units) and `phase_deg`, the phase lag
--     from the reference pulse to the next positive peak of the nX signal, 0 <= phase_deg < 360;
--   * booleans are INTEGER 0 or 1.
-- Tables are not STRICT, so that SQLite clients older than 3.37 can still open the file.

-- 'veer' in ASCII: tells a veer database from any other SQLite file.
PRAGMA application_id = 1986356594;

CREATE TABLE machine (
    id                 TEXT PRIMARY KEY NOT NULL,
    name               TEXT NOT NULL,
    min_operating_rpm  REAL,
    max_continuous_rpm REAL,
    trip_rpm           REAL
);

CREATE TABLE sensor (
    machine   TEXT NOT NULL REFERENCES machine(id) ON DELETE CASCADE,
    channel   TEXT NOT NULL,
    kind      TEXT NOT NULL,
    units     TEXT NOT NULL,
    angle_deg REAL,
    PRIMARY KEY (machine, channel)
);

CREATE TABLE ingest (
    id           INTEGER PRIMARY KEY,
    machine      TEXT REFERENCES machine(id) ON DELETE CASCADE,
    kind         TEXT NOT NULL CHECK (kind IN ('file', 'stream')),
    source       TEXT NOT NULL,
    content_hash TEXT NOT NULL,
    bytes        INTEGER,
    status       TEXT NOT NULL CHECK (status IN ('pending', 'done', 'failed')),
    error        TEXT,
    started_at   REAL NOT NULL,
    finished_at  REAL,
    data_start   REAL,
    data_end     REAL
);
CREATE INDEX ingest_by_hash ON ingest (content_hash);
CREATE INDEX ingest_by_machine ON ingest (machine, data_end);

CREATE TABLE event (
    id               INTEGER PRIMARY KEY,
    machine          TEXT NOT NULL REFERENCES machine(id) ON DELETE CASCADE,
    ingest_id        INTEGER REFERENCES ingest(id) ON DELETE SET NULL,
    kind             TEXT NOT NULL CHECK (kind IN ('run-up', 'coast-down')),
    start_time       REAL NOT NULL,
    end_time         REAL NOT NULL,
    speed_start_rpm  REAL NOT NULL,
    speed_end_rpm    REAL NOT NULL,
    sweep_rate_rpm_s REAL NOT NULL,
    vector_count     INTEGER NOT NULL
);
CREATE INDEX event_by_machine ON event (machine, start_time);
CREATE INDEX event_by_ingest ON event (ingest_id);

CREATE TABLE event_channel (
    event_id             INTEGER NOT NULL REFERENCES event(id) ON DELETE CASCADE,
    channel              TEXT NOT NULL,
    units                TEXT NOT NULL,
    slow_roll_amplitude  REAL,
    slow_roll_phase_deg  REAL,
    slow_roll_min_rpm    REAL,
    slow_roll_max_rpm    REAL,
    slow_roll_points     INTEGER,
    PRIMARY KEY (event_id, channel)
);

CREATE TABLE vector (
    event_id   INTEGER NOT NULL REFERENCES event(id) ON DELETE CASCADE,
    channel    TEXT NOT NULL,
    nx         INTEGER NOT NULL CHECK (nx >= 1),
    series     TEXT NOT NULL CHECK (series IN ('measured', 'compensated')),
    time       REAL NOT NULL,
    speed_rpm  REAL NOT NULL,
    amplitude  REAL NOT NULL,
    phase_deg  REAL NOT NULL
);
CREATE INDEX vector_by_event ON vector (event_id, channel, nx, series);

CREATE TABLE order_map (
    event_id   INTEGER NOT NULL REFERENCES event(id) ON DELETE CASCADE,
    channel    TEXT NOT NULL,
    time       REAL NOT NULL,
    speed_rpm  REAL NOT NULL,
    order_step REAL NOT NULL CHECK (order_step > 0),
    bins       INTEGER NOT NULL CHECK (bins >= 0),
    amplitudes BLOB NOT NULL CHECK (length(amplitudes) = 4 * bins)
);
CREATE INDEX order_map_by_event ON order_map (event_id, channel);

CREATE TABLE resonance (
    id                   INTEGER PRIMARY KEY,
    event_id             INTEGER NOT NULL REFERENCES event(id) ON DELETE CASCADE,
    channel              TEXT NOT NULL,
    nx                   INTEGER NOT NULL CHECK (nx >= 1),
    speed_rpm            REAL NOT NULL,
    peak_amplitude       REAL NOT NULL,
    phase_deg            REAL NOT NULL,
    phase_change_deg     REAL NOT NULL,
    n1_rpm               REAL,
    n2_rpm               REAL,
    amplification_factor REAL,
    damping_ratio        REAL,
    heavily_damped       INTEGER NOT NULL CHECK (heavily_damped IN (0, 1)),
    natural_rpm          REAL,
    required_margin_pct  REAL,
    actual_margin_pct    REAL,
    margin_verdict       TEXT
);
CREATE INDEX resonance_by_event ON resonance (event_id);

CREATE TABLE critical (
    id                   INTEGER PRIMARY KEY,
    machine              TEXT NOT NULL REFERENCES machine(id) ON DELETE CASCADE,
    mode                 INTEGER NOT NULL CHECK (mode >= 1),
    origin               TEXT NOT NULL CHECK (origin IN ('design', 'measured')),
    event_id             INTEGER REFERENCES event(id) ON DELETE CASCADE,
    channel              TEXT,
    speed_rpm            REAL NOT NULL,
    amplification_factor REAL,
    damping_ratio        REAL,
    valid_from           REAL NOT NULL,
    CHECK ((origin = 'design' AND event_id IS NULL) OR (origin = 'measured' AND event_id IS NOT NULL))
);
CREATE INDEX critical_by_machine ON critical (machine, mode, valid_from);

CREATE TABLE critical_estimate (
    id              INTEGER PRIMARY KEY,
    critical_id     INTEGER NOT NULL REFERENCES critical(id) ON DELETE CASCADE,
    time            REAL NOT NULL,
    estimate_rpm    REAL NOT NULL,
    uncertainty_rpm REAL,
    informative     INTEGER NOT NULL CHECK (informative IN (0, 1))
);
CREATE INDEX critical_estimate_by_critical ON critical_estimate (critical_id, time);

CREATE TABLE trend (
    id             INTEGER PRIMARY KEY,
    machine        TEXT NOT NULL REFERENCES machine(id) ON DELETE CASCADE,
    channel        TEXT NOT NULL,
    time           REAL NOT NULL,
    speed_rpm      REAL NOT NULL,
    x1_amplitude   REAL NOT NULL,
    x1_phase_deg   REAL NOT NULL,
    x2_amplitude   REAL,
    x2_phase_deg   REAL,
    overall        REAL,
    overall_min    REAL,
    overall_max    REAL,
    samples        INTEGER NOT NULL DEFAULT 1 CHECK (samples >= 1),
    CHECK ((x2_amplitude IS NULL) = (x2_phase_deg IS NULL))
);
CREATE INDEX trend_by_machine ON trend (machine, time);

CREATE TABLE alert (
    id          INTEGER PRIMARY KEY,
    machine     TEXT NOT NULL REFERENCES machine(id) ON DELETE CASCADE,
    kind        TEXT NOT NULL,
    severity    TEXT NOT NULL CHECK (severity IN ('warning', 'alarm')),
    state       TEXT NOT NULL CHECK (state IN ('open', 'closed')),
    opened_at   REAL NOT NULL,
    closed_at   REAL,
    message     TEXT NOT NULL,
    evidence    TEXT CHECK (evidence IS NULL OR json_valid(evidence)),
    event_id    INTEGER REFERENCES event(id) ON DELETE SET NULL,
    CHECK ((state = 'open') = (closed_at IS NULL))
);
CREATE INDEX alert_by_machine ON alert (machine, state, opened_at);
CREATE INDEX alert_by_time ON alert (opened_at);

CREATE TABLE gap (
    id             INTEGER PRIMARY KEY,
    machine        TEXT NOT NULL REFERENCES machine(id) ON DELETE CASCADE,
    ingest_id      INTEGER REFERENCES ingest(id) ON DELETE SET NULL,
    source         TEXT NOT NULL,
    start_time     REAL NOT NULL,
    end_time       REAL NOT NULL CHECK (end_time >= start_time),
    dropped_frames INTEGER NOT NULL CHECK (dropped_frames >= 0),
    corrupt_frames INTEGER NOT NULL CHECK (corrupt_frames >= 0)
);
CREATE INDEX gap_by_machine ON gap (machine, start_time);

CREATE TABLE sensor_health (
    id        INTEGER PRIMARY KEY,
    machine   TEXT NOT NULL REFERENCES machine(id) ON DELETE CASCADE,
    channel   TEXT,
    time      REAL NOT NULL,
    condition TEXT NOT NULL,
    healthy   INTEGER NOT NULL CHECK (healthy IN (0, 1)),
    detail    TEXT
);
CREATE INDEX sensor_health_by_machine ON sensor_health (machine, time);

-- Critical speeds tracked between run-ups: the single-mode model each measured critical was fitted
-- with, and the figures behind every live estimate made from it.

CREATE TABLE critical_model (
    critical_id          INTEGER PRIMARY KEY REFERENCES critical(id) ON DELETE CASCADE,
    track                TEXT NOT NULL,
    natural_rpm          REAL NOT NULL CHECK (natural_rpm > 0),
    damping_ratio        REAL NOT NULL CHECK (damping_ratio > 0 AND damping_ratio < 1),
    modal_amplitude      REAL NOT NULL CHECK (modal_amplitude > 0),
    modal_phase_deg      REAL NOT NULL,
    background_amplitude REAL NOT NULL,
    background_phase_deg REAL NOT NULL,
    slow_roll_amplitude  REAL NOT NULL,
    slow_roll_phase_deg  REAL NOT NULL,
    fit_residual         REAL
);

ALTER TABLE critical_estimate ADD COLUMN channel TEXT;
ALTER TABLE critical_estimate ADD COLUMN speed_rpm REAL;
ALTER TABLE critical_estimate ADD COLUMN natural_rpm REAL;
ALTER TABLE critical_estimate ADD COLUMN speed_ratio REAL;
ALTER TABLE critical_estimate ADD COLUMN method TEXT;
ALTER TABLE critical_estimate ADD COLUMN reason TEXT;
ALTER TABLE critical_estimate ADD COLUMN change_kind TEXT
    CHECK (change_kind IS NULL OR change_kind IN ('none', 'natural-speed', 'unbalance'));
ALTER TABLE critical_estimate ADD COLUMN locus_residual REAL;
ALTER TABLE critical_estimate ADD COLUMN revolutions INTEGER;

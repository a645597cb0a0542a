-- A ledger as the FIRST schema (v1) of magproof wrote it: no tool_version column, no
-- indexes. Hand-written, frozen: it must not change when the schema moves on, since it
-- is what the migration test starts from. Numbers are an invented example.
PRAGMA application_id = 1296519238; -- 0x4D475046, "MGPF"
PRAGMA user_version = 1;
CREATE TABLE runs (
    id          INTEGER PRIMARY KEY,
    serial      TEXT NOT NULL,
    build       TEXT NOT NULL,
    kind        TEXT NOT NULL CHECK (kind IN ('calibrate', 'polarity', 'dipole')),
    recorded_at TEXT NOT NULL,
    input_key   TEXT NOT NULL,
    pass        INTEGER CHECK (pass IN (0, 1)),
    result      TEXT NOT NULL
);
CREATE TABLE inputs (
    run_id   INTEGER NOT NULL REFERENCES runs (id) ON DELETE CASCADE,
    position INTEGER NOT NULL,
    role     TEXT NOT NULL CHECK (role IN ('log', 'plan')),
    path     TEXT NOT NULL,
    sha256   TEXT NOT NULL CHECK (length(sha256) = 64),
    PRIMARY KEY (run_id, position)
);
INSERT INTO runs VALUES (1, 'ORB-7', 'B1', 'calibrate', '2026-10-02T08:30:00.000Z',
    '1111111111111111111111111111111111111111111111111111111111111111', 1,
    '{"method":"tumble","hard_iron_nt":[410.0,-120.0,35.0],"hard_iron_sigma_nt":[6.0,6.0,8.0],"soft_iron":[[1.01,0.002,0.0],[0.002,0.99,0.001],[0.0,0.001,1.0]],"residual_rms_nt":42.0,"pass":true}');
INSERT INTO inputs VALUES (1, 0, 'log', 'tumble_b1.csv',
    'aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa');
INSERT INTO runs VALUES (2, 'ORB-7', 'B2', 'calibrate', '2026-10-09T08:30:00.000Z',
    '2222222222222222222222222222222222222222222222222222222222222222', 1,
    '{"method":"tumble","hard_iron_nt":[470.0,-118.0,30.0],"hard_iron_sigma_nt":[8.0,6.0,8.0],"soft_iron":[[1.01,0.002,0.0],[0.002,0.99,0.001],[0.0,0.001,1.0]],"residual_rms_nt":44.0,"pass":true}');
INSERT INTO inputs VALUES (2, 0, 'log', 'tumble_b2.csv',
    'bbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbb');

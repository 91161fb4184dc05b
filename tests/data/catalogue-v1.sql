-- Schema version 1 of the catalogue, kept as test data: test_identity builds a version-1 file from
-- it and checks that cat_open migrates it to the current schema.
-- bandsieve catalogue schema, version 1 (PRAGMA user_version = 1).
-- Applied by cat_open (CAT_RW) to a new file in one transaction; embedded in the program at
-- build time. Every table and column is documented in db/README.md.
-- Timestamps are UTC text, ISO 8601 with milliseconds ('2026-12-02T00:31:07.123Z').

CREATE TABLE runs (
    run_id      INTEGER PRIMARY KEY,
    kind        TEXT NOT NULL CHECK (kind IN ('screen', 'rescreen')),
    status      TEXT NOT NULL DEFAULT 'running'
                CHECK (status IN ('running', 'done', 'interrupted', 'failed')),
    started     TEXT NOT NULL,
    ended       TEXT,
    version     TEXT,
    settings    TEXT NOT NULL DEFAULT '{}',
    ranks       INTEGER,
    hosts       TEXT,
    cmdline     TEXT,
    set_path    TEXT,
    sessions    INTEGER NOT NULL DEFAULT 1
);

CREATE INDEX runs_resume ON runs (kind, status);

CREATE TABLE run_sessions (
    run_id        INTEGER NOT NULL REFERENCES runs (run_id),
    session       INTEGER NOT NULL,
    started       TEXT NOT NULL,
    ended         TEXT,
    ranks         INTEGER,
    hosts         TEXT,
    cmdline       TEXT,
    artifact_file TEXT,
    PRIMARY KEY (run_id, session)
);

CREATE TABLE materials (
    material_id TEXT PRIMARY KEY,
    formula     TEXT,
    dimension   INTEGER CHECK (dimension IS NULL OR dimension IN (2, 3)),
    norb        INTEGER,
    nr          INTEGER,
    nocc        INTEGER,
    spinful     INTEGER CHECK (spinful IS NULL OR spinful IN (0, 1)),
    set_path    TEXT,
    source      TEXT,
    card_json   TEXT,
    updated     TEXT NOT NULL
);

CREATE TABLE results (
    run_id          INTEGER NOT NULL REFERENCES runs (run_id),
    material_id     TEXT NOT NULL REFERENCES materials (material_id),
    status          TEXT NOT NULL CHECK (status IN ('ok', 'invalid', 'failed', 'timeout')),
    message         TEXT,
    class           TEXT,
    confidence      REAL,
    reason          TEXT,
    gap_direct_ev   REAL,
    gap_indirect_ev REAL,
    k_gap_direct    TEXT,
    time_reversal   INTEGER,
    inversion       INTEGER,
    z2              TEXT,
    z2_parity       TEXT,
    z2_wcc          TEXT,
    z2_status       TEXT,
    z2_note         TEXT,
    chern           INTEGER,
    chern_status    TEXT,
    plane_chern     TEXT,
    n_weyl          INTEGER,
    net_chirality   INTEGER,
    nodal_line      INTEGER,
    mesh            INTEGER,
    diag_seconds    REAL,
    seconds         REAL,
    rank            INTEGER,
    finished        TEXT NOT NULL,
    ahc_xy          REAL,
    ahc_yz          REAL,
    ahc_zx          REAL,
    ahc_units       TEXT,
    shc_xy          REAL,
    shc_units       TEXT,
    transport_fermi_ev REAL,
    diagnosis       TEXT,
    UNIQUE (run_id, material_id)
);

CREATE INDEX results_material ON results (material_id, status);

CREATE TABLE nodes (
    run_id      INTEGER NOT NULL,
    material_id TEXT NOT NULL,
    node        INTEGER NOT NULL,
    k1          REAL,
    k2          REAL,
    k3          REAL,
    chirality   INTEGER,
    energy_ev   REAL,
    gap_ev      REAL,
    PRIMARY KEY (run_id, material_id, node),
    FOREIGN KEY (run_id, material_id) REFERENCES results (run_id, material_id)
);

CREATE TABLE artifacts (
    run_id      INTEGER NOT NULL,
    material_id TEXT NOT NULL,
    kind        TEXT NOT NULL,
    plane       INTEGER,
    file        TEXT NOT NULL,
    h5path      TEXT NOT NULL,
    nstring     INTEGER,
    nband       INTEGER,
    FOREIGN KEY (run_id, material_id) REFERENCES results (run_id, material_id)
);

CREATE UNIQUE INDEX artifacts_key ON artifacts (run_id, material_id, kind, plane);

-- bandsieve catalogue schema, version 5 (PRAGMA user_version = 5). Older files are brought to
-- version 5 by cat_open (catalogue.c, MIGRATE_1_2, MIGRATE_2_3 and MIGRATE_3_4: the same columns
-- added with ALTER TABLE; MIGRATE_4_5: the same path tables created).
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
    sessions    INTEGER NOT NULL DEFAULT 1,
    set_content TEXT,
    rerun       INTEGER NOT NULL DEFAULT 0
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
    updated     TEXT NOT NULL,
    content     TEXT,
    set_content TEXT,
    comment     TEXT,
    orbital_labels TEXT,
    meta        TEXT
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
    content         TEXT,
    z2_nu0          INTEGER GENERATED ALWAYS AS (CASE WHEN z2 GLOB '[01]' OR z2 GLOB '[01];[01][01][01]' THEN CAST(substr(z2, 1, 1) AS INTEGER) END) VIRTUAL,
    z2_nu1          INTEGER GENERATED ALWAYS AS (CASE WHEN z2 GLOB '[01];[01][01][01]' THEN CAST(substr(z2, 3, 1) AS INTEGER) END) VIRTUAL,
    z2_nu2          INTEGER GENERATED ALWAYS AS (CASE WHEN z2 GLOB '[01];[01][01][01]' THEN CAST(substr(z2, 4, 1) AS INTEGER) END) VIRTUAL,
    z2_nu3          INTEGER GENERATED ALWAYS AS (CASE WHEN z2 GLOB '[01];[01][01][01]' THEN CAST(substr(z2, 5, 1) AS INTEGER) END) VIRTUAL,
    chern_k1_0      INTEGER GENERATED ALWAYS AS (CASE WHEN json_valid('[' || replace(plane_chern, ';', ',') || ']') THEN json_extract('[' || replace(plane_chern, ';', ',') || ']', '$[0]') END) VIRTUAL,
    chern_k1_half   INTEGER GENERATED ALWAYS AS (CASE WHEN json_valid('[' || replace(plane_chern, ';', ',') || ']') THEN json_extract('[' || replace(plane_chern, ';', ',') || ']', '$[1]') END) VIRTUAL,
    chern_k2_0      INTEGER GENERATED ALWAYS AS (CASE WHEN json_valid('[' || replace(plane_chern, ';', ',') || ']') THEN json_extract('[' || replace(plane_chern, ';', ',') || ']', '$[2]') END) VIRTUAL,
    chern_k2_half   INTEGER GENERATED ALWAYS AS (CASE WHEN json_valid('[' || replace(plane_chern, ';', ',') || ']') THEN json_extract('[' || replace(plane_chern, ';', ',') || ']', '$[3]') END) VIRTUAL,
    chern_k3_0      INTEGER GENERATED ALWAYS AS (CASE WHEN json_valid('[' || replace(plane_chern, ';', ',') || ']') THEN json_extract('[' || replace(plane_chern, ';', ',') || ']', '$[4]') END) VIRTUAL,
    chern_k3_half   INTEGER GENERATED ALWAYS AS (CASE WHEN json_valid('[' || replace(plane_chern, ';', ',') || ']') THEN json_extract('[' || replace(plane_chern, ';', ',') || ']', '$[5]') END) VIRTUAL,
    magnetism       TEXT,
    tr_verdict      TEXT,
    inv_verdict     TEXT,
    tr_breaking_ev  REAL,
    inv_breaking_ev REAL,
    symmetrised     INTEGER,
    restored        TEXT,
    breaking_ev     REAL,
    breaking_bound  TEXT,
    symmetry_margin REAL,
    spacegroup      INTEGER,
    symmetry_ops    INTEGER,
    crystal_breaking_ev REAL,
    z4              INTEGER,
    mirror_chern    INTEGER,
    mirror_chern_status TEXT,
    UNIQUE (run_id, material_id)
);

-- The indexes the views rely on are created by views.sql (results_best, results_failed, ...).

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

-- Phase paths of families (schema version 5; `screen --paths`, `rescreen --paths`): one row per
-- family in paths, holding the latest path computed for it (a new path of a family replaces the old
-- one and all its rows in one transaction), and its samples, phase intervals, events and node
-- tracks in the path_* tables. Every path_* row belongs to its family's paths row.
CREATE TABLE paths (
    family          TEXT PRIMARY KEY,
    run_id          INTEGER REFERENCES runs (run_id),
    status          TEXT NOT NULL CHECK (status IN ('ok', 'invalid', 'failed')),
    message         TEXT,
    parameter       TEXT,
    unit            TEXT,
    x_from          REAL,
    x_to            REAL,
    dimension       INTEGER,
    nmembers        INTEGER,
    members         TEXT,
    content         TEXT NOT NULL,
    tol_x           REAL NOT NULL,
    nsamples        INTEGER,
    gap_mesh        INTEGER,
    confidence      REAL,
    note            TEXT,
    gap_evaluations INTEGER,
    diagnoses       INTEGER,
    seconds         REAL,
    rank            INTEGER,
    finished        TEXT NOT NULL
);

CREATE TABLE path_samples (
    family        TEXT NOT NULL REFERENCES paths (family) ON DELETE CASCADE,
    sample        INTEGER NOT NULL,
    x             REAL NOT NULL,
    gap_direct_ev REAL,
    PRIMARY KEY (family, sample)
);

CREATE TABLE path_intervals (
    family        TEXT NOT NULL REFERENCES paths (family) ON DELETE CASCADE,
    interval      INTEGER NOT NULL,
    x_from        REAL NOT NULL,
    x_to          REAL NOT NULL,
    x_diagnosed   REAL,
    gapless       INTEGER NOT NULL CHECK (gapless IN (0, 1)),
    gap_direct_ev REAL,
    class         TEXT,
    z2            TEXT,
    chern         INTEGER,
    n_weyl        INTEGER,
    confidence    REAL,
    diagnosis     TEXT,
    PRIMARY KEY (family, interval)
);

CREATE TABLE path_events (
    family          TEXT NOT NULL REFERENCES paths (family) ON DELETE CASCADE,
    event           INTEGER NOT NULL,
    kind            TEXT NOT NULL CHECK (kind IN ('closing', 'pair created', 'pair annihilated',
                                                  'boundary crossing', 'node count', 'net chirality')),
    x               REAL NOT NULL,
    x_lo            REAL,
    x_hi            REAL,
    transition      TEXT,
    single_value    INTEGER,
    k1              REAL,
    k2              REAL,
    k3              REAL,
    k_label         TEXT,
    at_trim         INTEGER,
    nk              INTEGER,
    parity_exchange INTEGER,
    interval_before INTEGER,
    interval_after  INTEGER,
    interval        INTEGER,
    track_a         INTEGER,
    track_b         INTEGER,
    text            TEXT,
    prediction      TEXT,
    prediction_agrees INTEGER,
    PRIMARY KEY (family, event)
);

CREATE TABLE path_tracks (
    family             TEXT NOT NULL REFERENCES paths (family) ON DELETE CASCADE,
    track              INTEGER NOT NULL,
    chirality          INTEGER,
    created_with       INTEGER,
    annihilated_with   INTEGER,
    boundary_crossings INTEGER,
    npoints            INTEGER,
    PRIMARY KEY (family, track)
);

CREATE TABLE path_track_points (
    family TEXT NOT NULL REFERENCES paths (family) ON DELETE CASCADE,
    track  INTEGER NOT NULL,
    point  INTEGER NOT NULL,
    x      REAL NOT NULL,
    k1     REAL,
    k2     REAL,
    k3     REAL,
    PRIMARY KEY (family, track, point)
);

-- bandsieve catalogue views. Re-created by every cat_open (CAT_RW), so a new program version
-- brings its views to an old catalogue; documented in db/README.md.

DROP VIEW IF EXISTS transitions;
DROP VIEW IF EXISTS conflicts;
DROP VIEW IF EXISTS surfaces;
DROP VIEW IF EXISTS top_spin_hall;
DROP VIEW IF EXISTS failures;
DROP VIEW IF EXISTS candidates;
DROP VIEW IF EXISTS summary;
DROP VIEW IF EXISTS run_progress;

-- Access paths of the views (db/README.md, "Query plans"). Created here rather than in schema.sql
-- so that cat_open brings them to catalogues made by an older version too.
-- results_best: one material's rows by content, then in the order that chooses its summary row
-- (ok first, the ok row's mesh, run_id: the expressions of the summary subquery's ORDER BY), so
-- the choice among the current content's rows is the last entry of one index range, read without
-- a sort; status and mesh at the end make it covering for failures' resolved and the best-mesh
-- look-up of the set-up. It supersedes results_pick (material_id, status, mesh, run_id, content),
-- whose choice sorted each material's rows in a temporary b-tree, and version 1's
-- (material_id, status) index: one index entry per row, as before.
CREATE INDEX IF NOT EXISTS results_best ON results (material_id, content, (status = 'ok'),
    (CASE WHEN status = 'ok' THEN mesh END), run_id, status, mesh);
DROP INDEX IF EXISTS results_pick;
DROP INDEX IF EXISTS results_material;
-- results_failed: the rows that are not 'ok' (a few percent), in the failures view's order.
CREATE INDEX IF NOT EXISTS results_failed ON results (run_id, material_id) WHERE status <> 'ok';
-- results_progress: the per-run counts of run_progress from the index alone (covering). Ordered
-- by finished after run_id, so that a run's new rows go at the end of its range (the coordinator
-- writes them in finishing order) instead of all over it, as results_run's (run_id, status,
-- seconds) placed them by their seconds: that cost every insert a page touched in the middle of
-- the index, and every commit more pages written.
DROP INDEX IF EXISTS results_run;
CREATE INDEX IF NOT EXISTS results_progress ON results (run_id, finished, status, seconds);
-- results_shc: the rows top_spin_hall ranks, and the keys it ranks them by.
CREATE INDEX IF NOT EXISTS results_shc ON results (material_id, mesh, run_id)
    WHERE status = 'ok' AND shc_xy IS NOT NULL;

-- One row per material that has any result: among the rows about its current content (the
-- content hash last read from a set, materials.content), the most resolved successful row
-- (highest mesh among status 'ok', latest run on ties), else the latest row. Only when no row is
-- about the current content does an older content's row show, with current = 0 (to be redone).
-- contents > 1 says results of other contents exist for this id (view conflicts lists them).
-- The row is chosen by a correlated subquery over that material's rows (results_best) rather
-- than a window over the whole table, so a filter on the view reaches the base table: one
-- material costs an index look-up and the whole view is linear in the rows returned.
-- (run_id, material_id) is unique, so run_id settles every tie.
CREATE VIEW summary AS
SELECT k.material_id,
       m.formula,
       m.dimension,
       k.status,
       k.class,
       k.confidence,
       k.gap_direct_ev,
       k.gap_indirect_ev,
       k.z2,
       k.chern,
       k.plane_chern,
       k.n_weyl,
       k.net_chirality,
       k.nodal_line,
       CASE WHEN k.status <> 'ok' THEN NULL
            WHEN (k.z2 IS NOT NULL AND k.z2 GLOB '*[1-9]*')
              OR COALESCE(k.chern, 0) <> 0
              OR (k.plane_chern IS NOT NULL AND k.plane_chern GLOB '*[1-9]*')
              OR COALESCE(k.n_weyl, 0) > 0
              OR COALESCE(k.nodal_line, 0) <> 0
              OR k.class = 'topological crystalline insulator'
              OR COALESCE(k.mirror_chern, 0) <> 0
              OR k.z4 = 2 THEN 1
            ELSE 0 END AS nontrivial,
       k.mesh,
       k.run_id,
       k.finished,
       k.reason,
       k.message,
       k.ahc_xy,
       k.ahc_yz,
       k.ahc_zx,
       k.ahc_units,
       k.shc_xy,
       k.shc_units,
       k.content,
       (k.content IS m.content) AS current,
       -- Counted only where another content exists (rare); else 1 without a temporary b-tree.
       CASE WHEN EXISTS (SELECT 1 FROM results o
                         WHERE o.material_id = k.material_id AND o.content IS NOT k.content)
            THEN (SELECT COUNT(DISTINCT COALESCE(o.content, '')) FROM results o
                  WHERE o.material_id = k.material_id)
            ELSE 1 END AS contents,
       k.magnetism,
       k.tr_verdict,
       k.inv_verdict,
       k.symmetrised,
       k.restored,
       k.breaking_ev,
       k.breaking_bound,
       k.symmetry_margin,
       k.spacegroup,
       k.symmetry_ops,
       k.z4,
       k.mirror_chern,
       k.mirror_chern_status
FROM results k
LEFT JOIN materials m ON m.material_id = k.material_id
-- SQLite refuses outer columns in a subquery's ORDER BY, so "current content first" is two
-- subqueries: the best row of the current content, else (COALESCE evaluates it only then) the
-- best row of any content.
WHERE k.rowid = COALESCE(
        (SELECT o.rowid FROM results o
         WHERE o.material_id = k.material_id AND o.content IS m.content
         ORDER BY (o.status = 'ok') DESC,
                  CASE WHEN o.status = 'ok' THEN o.mesh END DESC NULLS LAST,
                  o.run_id DESC
         LIMIT 1),
        (SELECT o.rowid FROM results o
         WHERE o.material_id = k.material_id
         ORDER BY (o.status = 'ok') DESC,
                  CASE WHEN o.status = 'ok' THEN o.mesh END DESC NULLS LAST,
                  o.run_id DESC
         LIMIT 1))
ORDER BY k.material_id;

-- Materials worth a closer look: topologically nontrivial, or called with confidence below 0.7.
-- Nontrivial calls of confidence >= 0.7 come first, then the rest; within each group by the
-- gap (indirect gap, else direct) descending.
CREATE VIEW candidates AS
SELECT s.*,
       CASE WHEN s.nontrivial = 1 AND COALESCE(s.confidence, 0) >= 0.7 AND s.z4 = 2
                 AND s.z2 GLOB '0*' AND COALESCE(s.mirror_chern, 0) = 0 THEN 'higher-order candidate (z4 = 2)'
            WHEN s.nontrivial = 1 AND COALESCE(s.confidence, 0) >= 0.7 THEN 'nontrivial'
            WHEN s.nontrivial = 1 THEN 'nontrivial, low confidence'
            ELSE 'low confidence' END AS why
FROM summary s
WHERE s.status = 'ok'
  AND (s.nontrivial = 1 OR s.confidence IS NULL OR s.confidence < 0.7)
ORDER BY (s.nontrivial = 1 AND COALESCE(s.confidence, 0) >= 0.7) DESC,
         COALESCE(s.gap_indirect_ev, s.gap_direct_ev) DESC NULLS LAST,
         s.material_id;

-- Every row that is not 'ok', newest run first, with whether the material has an 'ok' row in
-- any run (resolved = 1) and where the run came from. The first column, cause, is the message
-- with the set's path dropped and a leading "materials/<id>[/dataset]: " location moved to the
-- end in brackets, so what went wrong comes first: "not Hermitian: ... [materials/JQ-0013]".
CREATE VIEW failures AS
WITH rel AS (
    -- The failed rows themselves (not their row ids joined back to results), so the scan reads
    -- the partial index results_failed, already in the order below.
    SELECT r.run_id, r.material_id, r.status, r.message, r.rank, r.seconds, r.finished,
           CASE WHEN instr(r.message, ':/materials/') > 0
                THEN substr(r.message, instr(r.message, ':/materials/') + 2)
                ELSE r.message END AS msg
    FROM results r
    WHERE r.status <> 'ok'
)
SELECT CASE WHEN x.msg LIKE 'materials/%' AND instr(x.msg, ': ') > 0
            THEN substr(x.msg, instr(x.msg, ': ') + 2) || ' [' || substr(x.msg, 1, instr(x.msg, ': ') - 1) || ']'
            ELSE x.msg END AS cause,
       x.material_id,
       x.status,
       x.run_id,
       x.message,
       x.rank,
       x.seconds,
       x.finished,
       EXISTS (SELECT 1 FROM results o
               WHERE o.material_id = x.material_id AND o.status = 'ok') AS resolved,
       u.kind,
       u.set_path
FROM rel x
JOIN runs u ON u.run_id = x.run_id
ORDER BY x.run_id DESC, x.material_id;

-- Materials by the size of their intrinsic spin Hall conductivity: per material the most
-- resolved 'ok' row that has one (highest mesh, latest run on ties), which need not be the
-- summary row when the latest run skipped transport. Grouped by units (2D and 3D differ), then
-- |shc_xy| descending.
CREATE VIEW top_spin_hall AS
SELECT r.material_id,
       m.formula,
       m.dimension,
       r.class,
       r.shc_xy,
       r.shc_units,
       r.ahc_xy,
       r.ahc_yz,
       r.ahc_zx,
       r.ahc_units,
       r.transport_fermi_ev,
       r.gap_indirect_ev,
       r.z2,
       r.mesh,
       r.run_id
FROM results r
LEFT JOIN materials m ON m.material_id = r.material_id
WHERE r.status = 'ok' AND r.shc_xy IS NOT NULL
  AND r.rowid = (SELECT o.rowid FROM results o
                 WHERE o.material_id = r.material_id AND o.status = 'ok' AND o.shc_xy IS NOT NULL
                 ORDER BY o.mesh DESC NULLS LAST, o.run_id DESC
                 LIMIT 1)
ORDER BY r.shc_units, abs(r.shc_xy) DESC, r.material_id;

-- One row per run: its description and how many results of each status it holds.
CREATE VIEW run_progress AS
SELECT u.run_id,
       u.kind,
       u.status,
       u.started,
       u.ended,
       u.sessions,
       u.ranks,
       u.set_path,
       COUNT(r.run_id) AS results,
       COALESCE(SUM(r.status = 'ok'), 0) AS ok,
       COALESCE(SUM(r.status = 'invalid'), 0) AS invalid,
       COALESCE(SUM(r.status = 'failed'), 0) AS failed,
       COALESCE(SUM(r.status = 'timeout'), 0) AS timeout,
       SUM(r.seconds) AS worker_seconds
FROM runs u
LEFT JOIN results r ON r.run_id = u.run_id
GROUP BY u.run_id
ORDER BY u.run_id;

-- surfaces: the surface evidence of `screen --surfaces` for each material's summary row: the plane,
-- and the Fermi-level crossings of top- and bottom-surface states between the first two surface
-- TRIMs (odd: the surface cannot be made trivial), from the stored diagnosis JSON; surface_status
-- says whether the counts of every TRIM pair have the parity the bulk parities require
-- ('consistent'), could not be made to ('inconclusive', with surface_reason), or were not checked.
CREATE VIEW surfaces AS
SELECT s.material_id,
       s.class,
       json_extract(r.diagnosis, '$.surface.direction') AS direction,
       json_extract(r.diagnosis, '$.surface.layers') AS layers,
       json_extract(r.diagnosis, '$.surface.crossings.top') AS crossings_top,
       json_extract(r.diagnosis, '$.surface.crossings.bottom') AS crossings_bottom,
       json_extract(r.diagnosis, '$.surface.crossings.top') % 2 = 1 AS odd_top,
       json_extract(r.diagnosis, '$.surface.dirac_points_top') AS dirac_points_top,
       json_extract(r.diagnosis, '$.surface.status') AS surface_status,
       json_extract(r.diagnosis, '$.surface.reason') AS surface_reason,
       s.run_id
FROM summary s
JOIN results r ON r.run_id = s.run_id AND r.material_id = s.material_id
WHERE json_extract(r.diagnosis, '$.surface') IS NOT NULL;

-- conflicts: ids that have results about more than one content (a repacked entry, or two sets
-- that use the same id for different materials), one row per (id, content): whether it is the
-- current content, how many rows, the best ok mesh, the latest run and that run's set path.
CREATE VIEW conflicts AS
WITH per AS (
    SELECT r.material_id,
           r.content,
           COUNT(*) AS results,
           MAX(CASE WHEN r.status = 'ok' THEN r.mesh END) AS best_mesh,
           MAX(r.run_id) AS last_run_id
    FROM results r
    WHERE r.material_id IN (SELECT material_id FROM results
                            GROUP BY material_id HAVING COUNT(DISTINCT COALESCE(content, '')) > 1)
    GROUP BY r.material_id, r.content
)
SELECT p.material_id,
       p.content,
       (p.content IS m.content) AS current,
       p.results,
       p.best_mesh,
       p.last_run_id,
       u.set_path
FROM per p
LEFT JOIN materials m ON m.material_id = p.material_id
LEFT JOIN runs u ON u.run_id = p.last_run_id
ORDER BY p.material_id, current DESC, p.last_run_id DESC;

-- transitions: one row per gap closing of every family's stored path (`screen --paths`): where on
-- the path (value, and for a gapless interval its edges), what kind of transition, where in k (the
-- first touching point; at_trim), and the phase interval on either side with its class and
-- invariants. Ordered along each path.
CREATE VIEW transitions AS
SELECT p.family,
       p.parameter,
       p.unit,
       e.x AS value,
       e.x_lo AS value_from,
       e.x_hi AS value_to,
       e.single_value,
       e.transition AS kind,
       e.k_label,
       e.k1,
       e.k2,
       e.k3,
       e.at_trim,
       e.parity_exchange,
       b.class AS class_before,
       a.class AS class_after,
       b.z2 AS z2_before,
       a.z2 AS z2_after,
       b.chern AS chern_before,
       a.chern AS chern_after,
       p.tol_x,
       p.run_id
FROM path_events e
JOIN paths p ON p.family = e.family
LEFT JOIN path_intervals b ON b.family = e.family AND b.interval = e.interval_before
LEFT JOIN path_intervals a ON a.family = e.family AND a.interval = e.interval_after
WHERE e.kind = 'closing' AND p.status = 'ok'
ORDER BY p.family, e.x;

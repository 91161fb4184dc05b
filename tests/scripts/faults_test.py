#!/usr/bin/env python3
"""Fault tests of the screening job (issue 15): full disks, unwritable artifacts, corrupt sets,
runaway queries, hostile numbers, memory budgets, random kills.

Each case reproduces one fault and checks the program's answer against an independent reading:
the catalogue is read with Python's own sqlite3 module, and the final catalogue after the fault
and a resume is compared row by row with a one-shot run of the same set.
Usage: faults_test.py BINARY CASE WORKDIR
"""
import os
import random
import shutil
import signal
import sqlite3
import subprocess
import sys
import time

BIN, CASE, WORK = sys.argv[1], sys.argv[2], sys.argv[3]
ENV = dict(os.environ, OMPI_ALLOW_RUN_AS_ROOT="1", OMPI_ALLOW_RUN_AS_ROOT_CONFIRM="1",
           OMPI_MCA_rmaps_base_oversubscribe="1")
COLS = ("material_id, status, class, gap_direct_ev, gap_indirect_ev, z2, chern, n_weyl, "
        "net_chirality, confidence, mesh")


def fail(msg):
    print("FAIL:", msg)
    sys.exit(1)


def run(args, env=None, **kw):
    return subprocess.run(args, env=env or ENV, capture_output=True, text=True, **kw)


def fresh(name):
    d = os.path.join(WORK, name)
    if os.path.ismount(d):
        subprocess.run(["umount", d])
    shutil.rmtree(d, ignore_errors=True)
    os.makedirs(d)
    return d


def make_set(d, count, seed=7):
    path = os.path.join(d, "set.h5")
    p = run([BIN, "demo-set", "-o", path, "--count", str(count), "--seed", str(seed)])
    if p.returncode != 0:
        fail(f"demo-set: {p.stderr}")
    return path


def summary(cat):
    con = sqlite3.connect(f"file:{cat}?mode=ro", uri=True)
    rows = con.execute(f"SELECT {COLS} FROM summary ORDER BY material_id").fetchall()
    con.close()
    return rows


def one_shot(set_path, d):
    cat = os.path.join(d, "oneshot.sqlite")
    p = run([BIN, "screen", set_path, "-c", cat])
    if p.returncode not in (0, 1):
        fail(f"one-shot screen: {p.returncode} {p.stderr}")
    return summary(cat)


def screen(set_path, cat, *extra, ranks=1, env=None, preexec=None):
    cmd = [BIN, "screen", set_path, "-c", cat, *extra]
    if ranks > 1:
        cmd = ["mpirun", "-n", str(ranks), "--oversubscribe"] + cmd
    return subprocess.run(cmd, env=env or ENV, capture_output=True, text=True, preexec_fn=preexec)


def check_no_crash(p, what):
    if p.returncode < 0 or p.returncode > 128:
        fail(f"{what}: killed by a signal (exit {p.returncode}): {p.stderr[-800:]}")


def statuses(cat):
    con = sqlite3.connect(f"file:{cat}?mode=ro", uri=True)
    res = dict(con.execute("SELECT status, count(*) FROM results GROUP BY status").fetchall())
    runs = con.execute("SELECT run_id, status FROM runs ORDER BY run_id").fetchall()
    check = con.execute("PRAGMA integrity_check").fetchone()[0]
    con.close()
    return res, runs, check


def try_mount_tmpfs(d, kb):
    """A small tmpfs at d (needs root and a sandbox that allows mount); False when refused.
    Set BS_TEST_NO_MOUNT=1 to check the cases' behaviour where mount is refused."""
    if os.environ.get("BS_TEST_NO_MOUNT"):
        return False
    if os.geteuid() != 0:
        return False
    p = subprocess.run(["mount", "-t", "tmpfs", "-o", f"size={kb}k", "tmpfs", d], capture_output=True)
    return p.returncode == 0


def case_disk_full():
    """Issue 15 (1), 2026-12-02: a screen whose catalogue sits on a full disk crashed (SIGSEGV,
    exit 139) when the artifact file was closed a second time after its close failed. Now: exit
    status 3, a message naming the cause and the path, the committed rows intact, and a resume
    after space is freed gives the rows of a one-shot run. Needs a tmpfs mount (skipped, exit
    77, where the sandbox refuses one)."""
    base = fresh("disk_full")
    s = make_set(base, 60)
    ref = one_shot(s, base)
    checked = 0
    # Free space left for the job, in kB: the set's results need about 440 kB, so each of these
    # stops the job at a different point (artifact flush, artifact close, SQLite commit). 200 rather
    # than 120: a new catalogue with the views' indexes (db/views.sql) and the path tables of schema
    # 5 no longer fits in 150 kB (the screen then stops before the schema exists, exit 3 as well).
    for free_kb in (200, 250, 300, 380):
        d = os.path.join(base, f"free{free_kb}")
        os.makedirs(d)
        mounted = try_mount_tmpfs(d, 2048)
        if not mounted:
            # A file size limit would do for the writes, but it also breaks MPI's start-up (its
            # shared-memory files), so without mount the case cannot run; the injected write
            # failure of case artifact_unwritable still runs everywhere.
            print("skipped: mount -t tmpfs is not permitted here (needs root in a sandbox that allows it)")
            sys.exit(77)
        preexec = None
        with open(os.path.join(d, "filler"), "wb") as f:
            f.write(b"\0" * ((2048 - free_kb) * 1024))
        how = "tmpfs with a filler file"
        cat = os.path.join(d, "cat.sqlite")
        try:
            # Commits every 8 results, so that some rows are committed before the disk fills.
            p = screen(s, cat, "--batch", "8", preexec=preexec)
            check_no_crash(p, f"screen with {free_kb} kB free ({how})")
            if p.returncode != 3:
                fail(f"{free_kb} kB free: expected exit status 3, got {p.returncode}: {p.stderr[-500:]}")
            last = p.stderr.strip().splitlines()[-1]
            if d not in last:
                fail(f"{free_kb} kB free: message does not name the path {d}: {last}")
            if mounted and "disk full" not in last:
                fail(f"{free_kb} kB free: message does not name the cause: {last}")
            res, runs, check = statuses(cat)
            if check != "ok":
                fail(f"{free_kb} kB free: integrity_check after the fault: {check}")
            if res.get("failed"):
                fail(f"{free_kb} kB free: {res['failed']} rows recorded failed for a storage fault")
            if any(st == "done" for _, st in runs):
                fail(f"{free_kb} kB free: the run ended done after a storage fault: {runs}")
            committed = sum(res.values())
            if mounted:
                os.remove(os.path.join(d, "filler"))
            p2 = screen(s, cat, "--batch", "8")
            check_no_crash(p2, "resume")
            if p2.returncode not in (0, 1):
                fail(f"{free_kb} kB free: resume failed ({p2.returncode}): {p2.stderr[-500:]}")
            got = summary(cat)
            if got != ref:
                diff = [(a, b) for a, b in zip(ref, got) if a != b][:3]
                fail(f"{free_kb} kB free: after resume {len(got)} rows differ from the one-shot run's "
                     f"{len(ref)}: {diff}")
            print(f"ok: {free_kb} kB free ({how}): exit 3, '{last[:150]}', {committed} rows committed, "
                  f"resume gives the one-shot's {len(ref)} rows")
            checked += 1
        finally:
            if mounted:
                subprocess.run(["umount", d])
    print(f"disk-full cases: {checked}")


def case_artifact_unwritable():
    """Issue 15 (2), 2026-12-02: with the run's artifact path made a folder, 9 of 22 materials
    were recorded `failed` and the run ended `done`. Now nothing is recorded failed for the
    storage fault, the run is not done, the exit status is 3 with the path in the message, and a
    resume gives the one-shot rows. Checked with 3 ranks (a folder in place of the file) and with
    one rank (a write failure injected for one material through BS_FAULT_ARTIFACT_WRITE)."""
    d = fresh("artifact_unwritable")
    s = make_set(d, 30)
    ref = one_shot(s, d)
    cat = os.path.join(d, "cat.sqlite")
    os.makedirs(cat + ".run1.s1.h5")
    p = screen(s, cat, "--batch", "4", ranks=3)
    check_no_crash(p, "screen with a folder as artifact file")
    ours = [l for l in p.stderr.splitlines() if l.startswith("bandsieve screen:")]
    last = ours[-1] if ours else ""
    if p.returncode != 3 or ".run1.s1.h5" not in last:
        fail(f"folder as artifact file: expected exit 3 naming the file, got {p.returncode}: {last}")
    res, runs, check = statuses(cat)
    if res.get("failed") or any(st == "done" for _, st in runs) or check != "ok":
        fail(f"folder as artifact file: results {res}, runs {runs}, integrity {check}")
    stored = sum(res.values())
    p2 = screen(s, cat, "--batch", "4", ranks=3)
    if p2.returncode not in (0, 1) or summary(cat) != ref:
        fail(f"resume after the folder fault: exit {p2.returncode}, rows differ: {p2.stderr[-400:]}")
    print(f"ok: folder as artifact file: exit 3 ({last[:160]}), {stored} rows kept, none failed; resume matches")

    d2 = fresh("artifact_injected")
    s2 = make_set(d2, 30)
    ref2 = one_shot(s2, d2)
    # A material with Wannier-centre flows (those are what the artifact file holds).
    con = sqlite3.connect(os.path.join(d2, "oneshot.sqlite"))
    victim = con.execute("SELECT material_id FROM artifacts ORDER BY material_id LIMIT 1").fetchone()[0]
    con.close()
    cat2 = os.path.join(d2, "cat.sqlite")
    p = screen(s2, cat2, env=dict(ENV, BS_FAULT_ARTIFACT_WRITE=victim))
    check_no_crash(p, "injected artifact fault")
    res, runs, _ = statuses(cat2)
    con = sqlite3.connect(cat2)
    has_victim = con.execute("SELECT count(*) FROM results WHERE material_id = ?", (victim,)).fetchone()[0]
    con.close()
    if p.returncode != 3 or has_victim or res.get("failed") or any(st == "done" for _, st in runs):
        fail(f"injected fault on {victim}: exit {p.returncode}, victim rows {has_victim}, {res}, {runs}")
    p2 = screen(s2, cat2)
    if p2.returncode not in (0, 1) or summary(cat2) != ref2:
        fail(f"resume after the injected fault: exit {p2.returncode}: {p2.stderr[-400:]}")
    print(f"ok: injected write fault on {victim}: not recorded, run interrupted, resume matches")


def case_corrupt_set():
    """Issue 15 (3), 2026-12-02: one corrupt byte in a set crashed `inspect` inside libhdf5, and in
    1 of 28 bit-flipped files a material's answer changed silently. Now every single-byte change
    of a set either leaves each entry's band energies exactly as before or makes reading that
    entry fail with a message (no crash, no silent change): the datasets carry HDF5's Fletcher32
    checksum and the metadata the format's own checksums. Also: a screen of a set with one
    corrupted entry records that entry as `invalid` with "corrupt" in its message and the others
    as in a one-shot run of the intact set."""
    d = fresh("flips")
    s = make_set(d, 12, seed=3)
    ids = ["JQ-0001", "JQ-0004", "JQ-0009", "JQ-0012"]
    k = "0.13,0.27,0.31"

    def bands(path, mid):
        return run([BIN, "bands", f"{path}:{mid}", "--k", k])

    ref = {}
    for mid in ids:
        p = bands(s, mid)
        if p.returncode != 0:
            fail(f"bands of the intact {mid}: {p.stderr}")
        ref[mid] = p.stdout
    data = open(s, "rb").read()

    def raw_range(mid, name):
        """Where dataset /materials/mid/name lies in the file: h5dump writes its raw bytes, which
        are then found in the file (the datasets are not compressed)."""
        out = os.path.join(d, "raw.bin")
        subprocess.run(["h5dump", "-d", f"/materials/{mid}/{name}", "-b", "LE", "-o", out, s],
                       capture_output=True)
        raw = open(out, "rb").read()
        at = data.find(raw)
        if not raw or at < 0:
            fail(f"cannot locate /materials/{mid}/{name} in the file")
        return at, len(raw)

    ranges = [raw_range(mid, name) for mid in ids for name in ("H", "deg")]
    rng = random.Random(15)
    counts = {"same": 0, "refused": 0}
    flipped = os.path.join(d, "flipped.h5")

    def write_flipped(pos, bit):
        bad = bytearray(data)
        bad[pos] ^= 1 << bit
        with open(flipped, "wb") as f:
            f.write(bad)

    # Half the flips anywhere in the file (metadata, index, attributes), half inside the
    # hopping data and weights, where an unchecked flip changes an answer.
    for trial in range(120):
        if trial % 2:
            at, n = ranges[rng.randrange(len(ranges))]
            pos = at + rng.randrange(n)
        else:
            pos = rng.randrange(len(data))
        write_flipped(pos, rng.randrange(8))
        for mid in ids:
            p = bands(flipped, mid)
            check_no_crash(p, f"bands after flipping byte {pos}")
            if p.returncode == 0 and p.stdout != ref[mid]:
                fail(f"byte {pos} flipped: {mid} changed silently:\n{ref[mid]}\n{p.stdout}")
            counts["same" if p.returncode == 0 else "refused"] += 1
    if counts["refused"] == 0:
        fail("no flipped byte was noticed: the test did not reach the data")
    print(f"ok: 120 single-bit flips x {len(ids)} entries: {counts['same']} reads unchanged, "
          f"{counts['refused']} refused with a message, 0 silent changes, 0 crashes")

    # One entry's hopping data damaged (the real part of its first on-site energy): the screen
    # costs that entry only, and its row says the file is corrupt.
    ref_rows = one_shot(s, d)
    at, _ = raw_range("JQ-0004", "H")
    bad = at + 6
    write_flipped(bad, 3)
    cat = os.path.join(d, "cat.sqlite")
    p = screen(flipped, cat)
    check_no_crash(p, "screen of the damaged set")
    con = sqlite3.connect(cat)
    row = con.execute("SELECT status, message FROM results WHERE material_id = 'JQ-0004'").fetchone()
    con.close()
    if not row or row[0] != "invalid" or "the file is corrupt" not in (row[1] or ""):
        fail(f"damaged JQ-0004 recorded as {row}")
    got = [r for r in summary(cat) if r[0] != "JQ-0004"]
    want = [r for r in ref_rows if r[0] != "JQ-0004"]
    if got != want:
        fail("the other entries of the damaged set differ from the intact set's screen")
    print(f"ok: byte {bad} flipped in JQ-0004: row invalid ({row[1][:120]}), {len(got)} other rows as in the intact set")


RUNAWAY = "WITH RECURSIVE c(x) AS (SELECT 1 UNION ALL SELECT x + 1 FROM c) SELECT count(*) FROM c"


def wait_or_kill(proc, seconds, what):
    """Liveness, not speed: a process that honours a signal ends long before this generous bound."""
    try:
        return proc.wait(timeout=seconds)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait()
        fail(f"{what}: still running {seconds} s later (killed)")


def case_queries():
    """Issue 15 (4, 6), 2026-12-02: a runaway --where or query ignored SIGTERM and SIGINT (a
    recursive CTE held the catalogue 11 minutes); a --where over ~1000 characters was cut in a
    fixed buffer ("malformed JSON"); query failed on read-only storage when the -shm file was
    missing (SQLite code 14); a catalogue failing integrity_check was opened without a word."""
    d = fresh("queries")
    s = make_set(d, 16)
    cat = os.path.join(d, "cat.sqlite")
    p = screen(s, cat)
    if p.returncode not in (0, 1):
        fail(f"screen: {p.stderr}")
    # A runaway query stops at SIGTERM and at SIGINT, and at --timeout.
    for sig in (signal.SIGTERM, signal.SIGINT):
        proc = subprocess.Popen([BIN, "query", cat, RUNAWAY], env=ENV, stdout=subprocess.PIPE,
                                stderr=subprocess.PIPE, text=True)
        time.sleep(1.0)
        proc.send_signal(sig)
        rc = wait_or_kill(proc, 30, f"runaway query after {sig.name}")
        err = proc.stderr.read()
        if rc != 1 or "signal" not in err:
            fail(f"runaway query after {sig.name}: exit {rc}, {err}")
    p = run([BIN, "query", cat, RUNAWAY, "--timeout", "0.5"], timeout=60)
    if p.returncode != 1 or "time limit" not in p.stderr:
        fail(f"query --timeout: exit {p.returncode}, {p.stderr}")
    # The same for rescreen --where: SIGTERM during the selection, and --where-timeout.
    where = "material_id IN (WITH RECURSIVE c(x) AS (SELECT 1 UNION ALL SELECT x + 1 FROM c) SELECT x FROM c)"
    proc = subprocess.Popen([BIN, "rescreen", s, "-c", cat, "--where", where], env=ENV,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    time.sleep(1.0)
    proc.send_signal(signal.SIGTERM)
    rc = wait_or_kill(proc, 30, "runaway rescreen --where after SIGTERM")
    err = proc.stderr.read()
    if rc != 3 or "signal" not in err:
        fail(f"runaway --where after SIGTERM: exit {rc}, {err}")
    p = run([BIN, "rescreen", s, "-c", cat, "--where", where, "--where-timeout", "0.5"], timeout=60)
    if p.returncode != 3 or "time limit" not in p.stderr:
        fail(f"rescreen --where-timeout: exit {p.returncode}, {p.stderr}")
    print("ok: runaway query and --where stop at SIGTERM, SIGINT and their time limits")

    # A --where of more than 2000 characters selects what it says.
    con = sqlite3.connect(cat)
    ok_ids = [r[0] for r in con.execute("SELECT material_id FROM summary WHERE status = 'ok' ORDER BY 1")]
    con.close()
    long_where = " OR ".join(f"material_id = 'NOPE-{i:04d}'" for i in range(90)) + f" OR material_id = '{ok_ids[0]}'"
    p = run([BIN, "rescreen", s, "-c", cat, "--where", long_where])
    if p.returncode not in (0, 1) or "1 materials selected" not in p.stderr:
        fail(f"rescreen with a --where of {len(long_where)} characters: exit {p.returncode}: {p.stderr[-300:]}")
    con = sqlite3.connect(cat)
    stored = con.execute("SELECT json_extract(settings, '$.where') FROM runs WHERE kind = 'rescreen'").fetchone()[0]
    con.close()
    if stored != long_where:
        fail("the --where condition stored in runs.settings differs from the one given")
    print(f"ok: a --where of {len(long_where)} characters selects 1 material and is stored whole")

    # Read-only storage without the -shm file: query still reads (immutable mode).
    ro = os.path.join(d, "ro")
    os.makedirs(ro)
    shutil.copy(cat, os.path.join(ro, "cat.sqlite"))
    if try_mount_tmpfs(ro, 4096):
        shutil.copy(cat, os.path.join(ro, "cat.sqlite"))
        subprocess.run(["mount", "-o", "remount,ro", ro], check=True)
        try:
            p = run([BIN, "query", os.path.join(ro, "cat.sqlite"), "SELECT count(*) AS n FROM summary", "--format", "csv"])
        finally:
            subprocess.run(["umount", ro])
        if p.returncode != 0 or p.stdout.split()[-1] != "16":
            fail(f"query on a read-only mount without -shm: exit {p.returncode}: {p.stdout} {p.stderr}")
        print("ok: query on a read-only mount without a -shm file reads the 16 rows")
    elif os.geteuid() != 0:
        os.chmod(ro, 0o555)
        p = run([BIN, "query", os.path.join(ro, "cat.sqlite"), "SELECT count(*) AS n FROM summary", "--format", "csv"])
        os.chmod(ro, 0o755)
        if p.returncode != 0 or p.stdout.split()[-1] != "16":
            fail(f"query in a folder without write permission: exit {p.returncode}: {p.stderr}")
        print("ok: query in a folder without write permission reads the 16 rows")
    else:
        print("note: neither a read-only mount nor a non-root user: the read-only check was not run")

    # A damaged catalogue: one page overwritten. quick_check finds it; screen refuses it.
    dmg = os.path.join(d, "damaged.sqlite")
    shutil.copy(cat, dmg)
    con = sqlite3.connect(dmg)
    page = con.execute("PRAGMA page_size").fetchone()[0]
    npages = con.execute("PRAGMA page_count").fetchone()[0]
    # The root page of the results table (a page that holds data whatever else the schema adds; a
    # page picked by position can be free or an empty table's, which quick_check need not read).
    root = con.execute("SELECT rootpage FROM sqlite_master WHERE name = 'results'").fetchone()[0]
    con.close()
    with open(dmg, "r+b") as f:
        f.seek(page * (root - 1) + 8)
        f.write(random.Random(4).randbytes(page - 16))
    con = sqlite3.connect(dmg)
    try:
        verdict = con.execute("PRAGMA quick_check").fetchone()[0]
    except sqlite3.DatabaseError as e:
        verdict = str(e)
    con.close()
    if verdict == "ok":
        fail("the overwritten page was not noticed by Python's sqlite3 quick_check either")
    p = screen(s, dmg)
    check_no_crash(p, "screen of a damaged catalogue")
    if p.returncode != 3 or "damaged" not in p.stderr or dmg not in p.stderr:
        fail(f"screen of a damaged catalogue: exit {p.returncode}: {p.stderr[-300:]}")
    print(f"ok: a damaged catalogue (page {root} of {npages}, the results table's root, overwritten; "
          f"Python's quick_check: "
          f"{verdict[:60]}) is refused: {p.stderr.strip().splitlines()[-1][:140]}")


GOOD = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "data", "good")


def card_variant(d, name, edit, table=None):
    """A copy of the graphene_gap test fixture with edit(card) applied; the table is copied too
    unless table (a path) replaces it."""
    import json
    card = json.load(open(os.path.join(GOOD, "graphene_gap.json")))
    edit(card)
    hop = os.path.join(d, f"{name}_hop.dat")
    if table is None:
        shutil.copy(os.path.join(GOOD, "graphene_gap_hop.dat"), hop)
        card["hoppings"] = os.path.basename(hop)
    else:
        card["hoppings"] = os.path.relpath(table, d)
    card["id"] = name
    path = os.path.join(d, f"{name}.json")
    text = json.dumps(card)
    # JSON has no infinity: 1e999 is written as text and read as overflow by the card reader.
    text = text.replace("123456789e300", "1e999")
    open(path, "w").write(text)
    return path


def case_validation():
    """Issue 15 (6), 2026-12-02: the card accepted fermi_energy_eV 1e999, lattice rows of 1e300
    and a FIFO as the table (it hung); --k 1e308 reported "zheevd failed"; --mesh up to 4096 was
    accepted although 3D allows 256, making every 3D entry a permanent invalid row; every
    repeated screen that did nothing added an empty run. Each is now refused up front with the
    key or option named (or, for the repeated screen, leaves the runs table as it was)."""
    d = fresh("validation")
    cases = {
        "fermi_inf": (lambda c: c.__setitem__("fermi_energy_eV", 123456789e300), "fermi_energy_eV"),
        "fermi_huge": (lambda c: c.__setitem__("fermi_energy_eV", 1e6), "fermi_energy_eV"),
        "lattice_huge": (lambda c: c["lattice"].__setitem__(0, [1e300, 0, 0]), "lattice"),
        "lattice_tiny": (lambda c: c["lattice"].__setitem__(2, [0, 0, 1e-300]), "lattice"),
        "position_far": (lambda c: c["orbitals"][0].__setitem__("position", [1e12, 0, 0]), "position"),
    }
    for name, (edit, key) in cases.items():
        card = card_variant(d, name, edit)
        p = run([BIN, "pack", "-o", os.path.join(d, f"{name}.h5"), card], timeout=60)
        check_no_crash(p, f"pack {name}")
        if p.returncode != 1 or key not in p.stderr:
            fail(f"card {name}: expected a refusal naming {key}, got exit {p.returncode}: {p.stderr}")
        p = run([BIN, "bands", card, "--k", "0.1,0.2"], timeout=60)
        if p.returncode == 0 or key not in p.stderr:
            fail(f"bands of card {name}: expected a refusal naming {key}, got exit {p.returncode}: {p.stderr}")
    print(f"ok: {len(cases)} hostile cards refused with the key named (pack and bands)")

    fifo = os.path.join(d, "table.fifo")
    os.mkfifo(fifo)
    card = card_variant(d, "fifo_table", lambda c: None, table=fifo)
    try:
        p = run([BIN, "pack", "-o", os.path.join(d, "fifo.h5"), card], timeout=60)
    except subprocess.TimeoutExpired:
        fail("pack with a FIFO as the hopping table still waits for a writer after 60 s")
    if p.returncode != 1 or "not a regular file" not in p.stderr:
        fail(f"FIFO as table: exit {p.returncode}: {p.stderr}")
    print("ok: a FIFO as the hopping table is refused at once")

    good = os.path.join(GOOD, "graphene_gap.json")
    p = run([BIN, "bands", good, "--k", "1e308,0,0"])
    if p.returncode != 2 or "--k" not in p.stderr:
        fail(f"bands --k 1e308: exit {p.returncode}: {p.stderr}")
    p = run([BIN, "bands", good, "--k", "0.25,0.5"])
    if p.returncode != 0:
        fail(f"bands at an ordinary k: {p.stderr}")
    print("ok: --k 1e308 refused as usage (exit 2)")

    s = make_set(d, 16)
    cat = os.path.join(d, "cat.sqlite")
    p = screen(s, cat, "--mesh", "300")
    if p.returncode != 2 or "--mesh" not in p.stderr or os.path.exists(cat) and statuses(cat)[0]:
        fail(f"screen --mesh 300 of a set with 3D entries: exit {p.returncode}: {p.stderr[-300:]}")
    p = run([BIN, "inspect", f"{s}:JQ-0002", "--mesh", "300"])
    if p.returncode != 2 or "--mesh" not in p.stderr:
        fail(f"inspect --mesh 300 of a 3D entry: exit {p.returncode}: {p.stderr}")
    print("ok: --mesh 300 refused at the command line for 3D (screen and inspect), nothing recorded")

    for i in range(3):
        p = screen(s, cat)
        if p.returncode not in (0, 1):
            fail(f"screen {i + 1}: {p.stderr[-300:]}")
    con = sqlite3.connect(cat)
    nruns = con.execute("SELECT count(*) FROM runs").fetchone()[0]
    con.close()
    if nruns != 1:
        fail(f"three screens of the same set left {nruns} runs, expected 1")
    print("ok: repeating a finished screen twice adds no run")


def random_insulator(d, n, name, seed):
    """An invented 2D model of n states: on-site energies -5 eV (first half) and +5 eV, weak random
    Hermitian couplings, so it is an insulator at half filling and fast to diagnose."""
    rng = random.Random(seed)
    H0 = [[0j] * n for _ in range(n)]
    H1 = [[complex(rng.gauss(0, 0.05), rng.gauss(0, 0.05)) for _ in range(n)] for _ in range(n)]
    for a in range(n):
        H0[a][a] = -5.0 if a < n // 2 else 5.0
        for b in range(a + 1, n):
            h = complex(rng.gauss(0, 0.05), rng.gauss(0, 0.05))
            H0[a][b], H0[b][a] = h, h.conjugate()
    mats = {(0, 0, 0): H0, (1, 0, 0): H1, (-1, 0, 0): [[H1[b][a].conjugate() for b in range(n)] for a in range(n)]}
    lines = ["invented random insulator (test data)", str(n), "3", "1 1 1"]
    for R, M in mats.items():
        for b in range(n):
            for a in range(n):
                lines.append(f"{R[0]} {R[1]} {R[2]} {a + 1} {b + 1} {M[a][b].real:.8f} {M[a][b].imag:.8f}")
    open(os.path.join(d, f"{name}_hop.dat"), "w").write("\n".join(lines) + "\n")
    import json
    card = {"id": name, "dimension": 2, "lattice": [[3, 0, 0], [0, 3, 0], [0, 0, 20]],
            "hoppings": f"{name}_hop.dat", "occupied_bands": n // 2, "spinful": False,
            "orbitals": [{"position": [rng.random(), rng.random(), 0], "l": 0} for _ in range(n)]}
    path = os.path.join(d, f"{name}.json")
    json.dump(card, open(path, "w"))
    return path


def peak_rss_kb(args):
    """Peak resident memory of a child process (the kernel's accounting, via wait4)."""
    proc = subprocess.Popen(args, env=ENV, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    _, status, usage = os.wait4(proc.pid, 0)
    if status != 0:
        fail(f"{' '.join(args)} exited with status {status}")
    return usage.ru_maxrss


def case_memory():
    """Issue 15 (5), 2026-12-02: memory grew as ~2 kB x n^2 per material and an entry too large
    for its rank's memory ran it out of memory. Now a per-material estimate is checked against a
    budget (--material-memory) before work starts: an entry over it gets an `invalid` row that
    gives the estimate and the budget, the others are computed as usual. The estimate is checked
    against the kernel's measured peak of `inspect` on an invented 64-state insulator."""
    d = fresh("memory")
    card = random_insulator(d, 64, "RI-64", 11)
    small = os.path.join(GOOD, "graphene_gap.json")
    base_kb = peak_rss_kb([BIN, "inspect", small])
    big_kb = peak_rss_kb([BIN, "inspect", card])
    measured = (big_kb - base_kb) * 1024
    # The estimate of diag_memory_bytes for this material, as the screen reports it.
    s = os.path.join(d, "set.h5")
    p = run([BIN, "pack", "-o", s, card, small])
    if p.returncode != 0:
        fail(f"pack: {p.stderr}")
    cat = os.path.join(d, "cat.sqlite")
    p = screen(s, cat, "--material-memory", "1M")
    check_no_crash(p, "screen with a 1 MB budget")
    con = sqlite3.connect(cat)
    rows = dict(con.execute("SELECT material_id, status || ': ' || COALESCE(message, '') FROM results"))
    con.close()
    big = rows.get("RI-64", "")
    if not big.startswith("invalid: needs an estimated") or "--material-memory" not in big:
        fail(f"RI-64 over a 1 MB budget recorded as {big!r}")
    if not rows.get("graphene_gap", "").startswith("ok"):
        fail(f"graphene_gap within budget recorded as {rows.get('graphene_gap')!r}")
    estimate = float(big.split("estimated ")[1].split(" MB")[0]) * 1e6
    if estimate < measured:
        fail(f"the estimate {estimate / 1e6:.1f} MB is below the measured peak {measured / 1e6:.1f} MB")
    if estimate > 20 * max(measured, 1e6):
        fail(f"the estimate {estimate / 1e6:.1f} MB is over 20 times the measured {measured / 1e6:.1f} MB")
    cat2 = os.path.join(d, "cat2.sqlite")
    p = screen(s, cat2, "--material-memory", "4G")
    con = sqlite3.connect(cat2)
    n_ok = con.execute("SELECT count(*) FROM results WHERE status = 'ok'").fetchone()[0]
    con.close()
    if n_ok != 2:
        fail(f"with a 4 GB budget {n_ok} of 2 entries are ok: {p.stderr[-300:]}")
    print(f"ok: RI-64 estimate {estimate / 1e6:.1f} MB vs measured peak {measured / 1e6:.1f} MB above the "
          f"baseline ({base_kb} kB); refused at 1 MB with its row, computed at 4 GB")


def count_results(cat):
    if not os.path.exists(cat):
        return 0
    try:
        con = sqlite3.connect(f"file:{cat}?mode=ro", uri=True, timeout=5)
        n = con.execute("SELECT count(*) FROM results").fetchone()[0]
        con.close()
        return n
    except sqlite3.Error:
        return 0


def case_kill_campaign():
    """Random-kill campaign (issue 15, keep the campaign running): a screen is killed with SIGKILL
    at random points at least 10 times, resumed each time, and the final catalogue is compared row
    by row with a one-shot screen of the same set: nothing lost, duplicated or changed. Each kill
    waits for new committed rows first, so that the material in flight differs from kill to kill
    (two kills on the same material would rightly record it failed, see README)."""
    d = fresh("kill_campaign")
    s = make_set(d, 150, seed=21)
    ref = one_shot(s, d)
    cat = os.path.join(d, "cat.sqlite")
    rng = random.Random(2026)
    kills, sessions = 0, 0
    while kills < 12:
        before = count_results(cat)
        proc = subprocess.Popen([BIN, "screen", s, "-c", cat, "--batch", "4"], env=ENV,
                                stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
        sessions += 1
        deadline = time.monotonic() + 120
        while proc.poll() is None and count_results(cat) < before + 5 and time.monotonic() < deadline:
            time.sleep(0.02)
        if proc.poll() is None:
            time.sleep(rng.uniform(0.0, 0.15))
        if proc.poll() is None:
            proc.kill()
            proc.wait()
            kills += 1
        else:
            break  # finished before a kill point: the campaign ran out of work
        if count_results(cat) >= len(ref):
            break
    p = screen(s, cat)
    if p.returncode not in (0, 1):
        fail(f"final resume after {kills} kills: exit {p.returncode}: {p.stderr[-300:]}")
    sessions += 1
    got = summary(cat)
    con = sqlite3.connect(cat)
    dup = con.execute("SELECT count(*) FROM (SELECT run_id, material_id FROM results GROUP BY 1, 2 HAVING count(*) > 1)").fetchone()[0]
    runs = con.execute("SELECT count(*), max(sessions) FROM runs").fetchone()
    con.close()
    if kills < 10:
        fail(f"only {kills} kill points landed during the screen (need 10)")
    if dup or got != ref:
        diff = [(a, b) for a, b in zip(ref, got) if a != b][:3]
        fail(f"after {kills} kills: {dup} duplicated rows, {len(got)} rows vs {len(ref)}, first differences {diff}")
    print(f"kill campaign: {kills} SIGKILLs, {sessions} sessions in {runs[0]} run, {len(got)} rows compared "
          f"with the one-shot run: 0 lost, 0 duplicated, 0 changed")


CASES = {name[5:]: fn for name, fn in globals().items() if name.startswith("case_")}

if __name__ == "__main__":
    if CASE not in CASES:
        fail(f"unknown case {CASE}; known: {', '.join(sorted(CASES))}")
    os.makedirs(WORK, exist_ok=True)
    CASES[CASE]()

#!/usr/bin/env python3
"""Anchors for the replay benchmark (benches/replay.rs): a straightforward Python pipeline that
does the same reductions and gradients as seepd on the fleet written by benches/fleet, and a
plain sqlite3 batched insert of the same readings.

  reference_pipeline.py pipeline CONFIG_DIR INPUT.ndjson OUT.sqlite [--check SEEPD.sqlite]
  reference_pipeline.py insert INPUT.ndjson OUT.sqlite

`pipeline` reads the site files with tomllib, reduces every reading (vibrating wire with
linear or polynomial calibration, thermal and sealed barometric correction from the nearest
barometer reading; 4-20 mA and psi transducers; standpipes; stage gauges) to pressure, pressure
head and total head, recomputes each nest's vertical gradient and flow direction and each toe
check (excess head, head above ground, exit gradient, critical gradient, factor of safety,
allowable head) whenever an input gets a reading, with the other input's latest head if within
1.5 x the interval, and stores readings and derived rows in SQLite (WAL, synchronous=FULL, one
transaction per 5,000 lines) -- as seepd replay does with `--db`. It does NOT do what seepd
also does per reading: health checks, Theil-Sen rates, completeness, alert rules, NDJSON
output. With --check it compares its total heads and derived values with seepd's database.
Prints one line: `readings N seconds S`.
"""

import bisect
import json
import sqlite3
import sys
import time
import tomllib
from pathlib import Path

BATCH = 5000
GAMMA_W = 9.81
PSI_KPA = 6.894757293168


def load(config_dir):
    insts, nests, toes = {}, [], []
    for p in sorted(Path(config_dir).glob("*.toml")):
        if p.name == "seepd.toml":
            continue
        site = tomllib.loads(p.read_text())
        for i in site.get("instrument", []):
            insts[i["id"]] = i
        nests.extend(site.get("nest", []))
        toes.extend(site.get("toe", []))
    by_input = {}
    for n in nests:
        for pz in n["piezometers"]:
            by_input.setdefault(pz, []).append(("nest", n))
    for t in toes:
        by_input.setdefault(t["piezometer"], []).append(("toe", t))
    return insts, by_input


def pressure_kpa(inst, raw, temp, baro):
    kind = inst["kind"]
    if kind == "vibrating_wire":
        vw = inst["vibrating_wire"]
        r = raw * raw / 1000.0
        if vw["calibration"] == "linear":
            p = vw["gauge_factor"] * (vw["zero_reading"] - r)
        else:
            p = vw["poly_a"] * r * r + vw["poly_b"] * r + vw["poly_c"]
        p += vw["thermal_factor"] * (temp - vw["zero_temperature_c"])
        if vw["barometric_correction"] == "sealed" and baro is not None:
            p -= baro - vw["zero_barometric_kpa"]
        return p
    pt = inst["pressure_transducer"]
    if pt["output"] == "mA":
        lo, hi = pt["current_range_ma"]
        p0, p1 = pt["pressure_span"]
        return p0 + (raw - lo) / (hi - lo) * (p1 - p0)
    return raw * PSI_KPA  # psi


class Pipeline:
    def __init__(self, insts, by_input):
        self.insts = insts
        self.by_input = by_input
        self.baro = {}  # barometer id -> (sorted times, values)
        self.heads = {}  # instrument -> (t_ms, head)

    def baro_at(self, bid, t_ms):
        times, vals = self.baro.get(bid, ([], []))
        k = bisect.bisect_left(times, t_ms)
        best = None
        for j in (k - 1, k):
            if 0 <= j < len(times) and abs(times[j] - t_ms) <= 7_200_000:
                if best is None or abs(times[j] - t_ms) < abs(times[best] - t_ms):
                    best = j
        return None if best is None else vals[best]

    def reading(self, rec):
        inst = self.insts[rec["instrument"]]
        t_ms = rec["time"] * 1000
        raw = float(rec["value"])
        temp = rec.get("temperature")
        kind = inst["kind"]
        baro = pressure = phead = head = None
        if kind == "barometer":
            times, vals = self.baro.setdefault(inst["id"], ([], []))
            times.append(t_ms)
            vals.append(raw)
            eng = raw
        elif kind == "stage_gauge":
            sg = inst["stage_gauge"]
            eng = raw
            head = sg["datum_elevation"] + raw if sg["mode"] == "depth_above_datum" else raw
        elif kind == "standpipe":
            eng = raw
            head = inst["standpipe"]["reference_elevation"] - raw
        else:
            sub = inst.get("vibrating_wire") or inst.get("pressure_transducer")
            if sub.get("barometric_correction") == "sealed":
                baro = self.baro_at(sub["barometer"], t_ms)
            pressure = pressure_kpa(inst, raw, temp, baro)
            eng = pressure
            phead = pressure / GAMMA_W
            head = inst["tip_elevation"] + phead
        row = (inst["id"], t_ms, t_ms, raw, temp, baro, eng, "kPa", pressure, phead, head, 0)
        derived = []
        if head is not None:
            self.heads[inst["id"]] = (t_ms, head)
            for kind, obj in self.by_input.get(inst["id"], []):
                derived.extend(self.derive(kind, obj, t_ms))
        return row, derived

    def input_head(self, pz, t_ms):
        h = self.heads.get(pz)
        if h is None or abs(h[0] - t_ms) > 1.5 * self.insts[pz]["interval_s"] * 1000:
            return None
        return h[1]

    def derive(self, kind, obj, t_ms):
        oid = obj["id"]
        if kind == "nest":
            upper, lower = obj["piezometers"]
            hu, hl = self.input_head(upper, t_ms), self.input_head(lower, t_ms)
            inputs = json.dumps([upper, lower])
            if hu is None or hl is None:
                return [(oid, q, t_ms, None, "-", "input missing", inputs)
                        for q in ("vertical_gradient", "flow_direction")]
            zu, zl = self.insts[upper]["tip_elevation"], self.insts[lower]["tip_elevation"]
            i_v = (hl - hu) / (zu - zl)
            band = obj.get("deadband", 0.0)
            d = 0.0 if abs(i_v) <= band else (1.0 if i_v > 0 else -1.0)
            return [(oid, "vertical_gradient", t_ms, i_v, "-", None, inputs),
                    (oid, "flow_direction", t_ms, d, "-", None, inputs)]
        pz = obj["piezometer"]
        h = self.input_head(pz, t_ms)
        inputs = json.dumps([pz])
        ground, zt = obj["ground_elevation"], obj["blanket_thickness"]
        i_c = (obj["gamma_sat_kn_m3"] - GAMMA_W) / GAMMA_W
        allowable = ground + i_c * zt / obj["fs_target"]
        if h is None:
            return [(oid, q, t_ms, None, "m", "input missing", inputs)
                    for q in ("excess_head", "head_above_ground", "exit_gradient",
                              "critical_gradient", "factor_of_safety", "allowable_head")]
        h_o = h - ground
        i = h_o / zt
        fs = i_c / i if i > 0 else None
        return [(oid, "excess_head", t_ms, h_o, "m", None, inputs),
                (oid, "head_above_ground", t_ms, h - ground, "m", None, inputs),
                (oid, "exit_gradient", t_ms, i, "-", None, inputs),
                (oid, "critical_gradient", t_ms, i_c, "-", None, inputs),
                (oid, "factor_of_safety", t_ms, fs, "-",
                 None if fs is not None else "not applicable", inputs),
                (oid, "allowable_head", t_ms, allowable, "m", None, inputs)]


def open_db(path):
    db = sqlite3.connect(path, isolation_level=None)
    db.execute("PRAGMA journal_mode=WAL")
    db.execute("PRAGMA synchronous=FULL")
    return db


def pipeline(config_dir, input_path, out):
    insts, by_input = load(config_dir)
    db = open_db(out)
    db.executescript("""
        CREATE TABLE readings (instrument TEXT NOT NULL, t_ms INTEGER NOT NULL,
            arrival_ms INTEGER NOT NULL, raw REAL NOT NULL, temperature_c REAL, baro_kpa REAL,
            eng_value REAL NOT NULL, eng_unit TEXT NOT NULL, pressure_kpa REAL,
            pressure_head_m REAL, total_head_m REAL, flags INTEGER NOT NULL DEFAULT 0,
            PRIMARY KEY (instrument, t_ms)) WITHOUT ROWID;
        CREATE TABLE derived (object TEXT NOT NULL, quantity TEXT NOT NULL,
            t_ms INTEGER NOT NULL, value REAL, unit TEXT NOT NULL, reason TEXT,
            inputs TEXT NOT NULL, PRIMARY KEY (object, quantity, t_ms)) WITHOUT ROWID;
    """)
    p = Pipeline(insts, by_input)
    n = 0
    readings, derived = [], []

    def flush():
        db.execute("BEGIN")
        db.executemany("INSERT OR IGNORE INTO readings VALUES (?,?,?,?,?,?,?,?,?,?,?,?)", readings)
        db.executemany("INSERT OR REPLACE INTO derived VALUES (?,?,?,?,?,?,?)", derived)
        db.execute("COMMIT")
        readings.clear()
        derived.clear()

    with open(input_path) as f:
        for line in f:
            row, d = p.reading(json.loads(line))
            readings.append(row)
            derived.extend(d)
            n += 1
            if n % BATCH == 0:
                flush()
    flush()
    return n


def compare(out, seepd_db):
    """Largest difference between this pipeline's values and seepd's (same keys)."""
    db = sqlite3.connect(out)
    db.execute("ATTACH DATABASE ? AS s", (seepd_db,))
    (rows, worst_head) = db.execute("""
        SELECT count(*), max(abs(r.total_head_m - q.total_head_m)) FROM readings r
        JOIN s.readings q USING (instrument, t_ms) WHERE r.total_head_m IS NOT NULL""").fetchone()
    (drows, worst_derived) = db.execute("""
        SELECT count(*), max(abs(d.value - q.value)) FROM derived d
        JOIN s.derived q USING (object, quantity, t_ms)""").fetchone()
    (mismatch,) = db.execute("""
        SELECT count(*) FROM derived d JOIN s.derived q USING (object, quantity, t_ms)
        WHERE (d.value IS NULL) != (q.value IS NULL)""").fetchone()
    (missing,) = db.execute("""
        SELECT count(*) FROM derived d WHERE NOT EXISTS (SELECT 1 FROM s.derived q
        WHERE q.object = d.object AND q.quantity = d.quantity AND q.t_ms = d.t_ms)""").fetchone()
    print(f"check: {rows} total heads, largest difference {worst_head}; {drows} derived values, "
          f"largest difference {worst_derived}, {mismatch} value/no-value mismatches, "
          f"{missing} not in seepd", file=sys.stderr)
    if rows == 0 or worst_head is None or worst_head > 1e-9 or mismatch or missing \
            or (worst_derived or 0) > 1e-9:
        sys.exit("check: the reference pipeline and seepd disagree")


def insert(input_path, out):
    db = open_db(out)
    db.execute("CREATE TABLE readings (instrument TEXT NOT NULL, t_ms INTEGER NOT NULL, "
               "value REAL NOT NULL, temperature_c REAL, PRIMARY KEY (instrument, t_ms)) "
               "WITHOUT ROWID")
    rows, n = [], 0
    with open(input_path) as f:
        for line in f:
            r = json.loads(line)
            rows.append((r["instrument"], r["time"] * 1000, r["value"], r.get("temperature")))
            n += 1
            if len(rows) == BATCH:
                db.execute("BEGIN")
                db.executemany("INSERT OR IGNORE INTO readings VALUES (?,?,?,?)", rows)
                db.execute("COMMIT")
                rows.clear()
    db.execute("BEGIN")
    db.executemany("INSERT OR IGNORE INTO readings VALUES (?,?,?,?)", rows)
    db.execute("COMMIT")
    return n


def main():
    args = sys.argv[1:]
    started = time.monotonic()
    if args[:1] == ["pipeline"]:
        n = pipeline(args[1], args[2], args[3])
    elif args[:1] == ["insert"]:
        n = insert(args[1], args[2])
    else:
        sys.exit(__doc__)
    print(f"readings {n} seconds {time.monotonic() - started:.3f}", flush=True)
    if "--check" in args:  # after the timing
        compare(args[3], args[args.index("--check") + 1])


if __name__ == "__main__":
    main()

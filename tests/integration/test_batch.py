#!/usr/bin/python3
"""End-to-end test of `aerosect batch` (issue #17 scope 4).

    test_batch.py AEROSECT SOURCE_DIR

Checks:
  - two case files in one call: each summary row (CSV and JSON) holds the
    very numbers `aerosect flutter CASE --json` prints for that case (equal
    as doubles: the CSV carries 17 significant digits);
  - a parameter table over one case: each row equals `aerosect flutter`
    with the same overrides as --set, named by the table's name column;
  - the LCO columns (freeplay band, onset EAS, the describing-function
    curve's stable range and its largest stable cycle at the case airspeed)
    equal the flutter command's JSON, and the gust columns the gust
    command's critical peaks, bit for bit; columns that do not apply are
    null / empty and the note says why;
  - the caution is in the CSV, the JSON and the text;
  - bad tables: a wrong field count and an unknown key give exit 2 naming
    the table file and line (and the key), and nothing is written.
Common practice, no source: a batch summary must equal the single runs.
"""

import csv
import json
import os
import subprocess
import sys
import tempfile

exe, src = sys.argv[1:3]
DEMO = os.path.join(src, "cases", "demo_aileron.toml")
ND = os.path.join(src, "tests", "regression", "cases", "flap_freeplay_3dof.toml")
failures = []


def check(what, ok, detail=""):
    print(("ok   " if ok else "FAIL ") + what + ("" if ok else f": {detail}"))
    if not ok:
        failures.append(what)


def run(*args):
    return subprocess.run([exe, *args], capture_output=True, text=True)


def flutter_fields(case, sets=()):
    args = ["flutter", case, "--json"]
    for s in sets:
        args += ["--set", s]
    r = run(*args)
    assert r.returncode == 0, r.stderr
    f = json.loads(r.stdout)
    out = {}
    for m in f["linearisations"][0]["methods"]:
        p = "pk_" if m["method"] == "p-k" else "state_space_"
        if m["flutter"].get("found"):
            for k in ("speed_m_s", "speed_eas_m_s", "reduced_speed", "frequency_hz"):
                out[p + "flutter_" + k] = m["flutter"][k]
        d = m.get("divergence") or {}
        if d.get("found") and "speed_m_s" in d:
            out[p + "divergence_speed_m_s"] = d["speed_m_s"]
    for k in ("margin_percent", "critical_eas_m_s", "required_eas_m_s", "dive_speed_eas_m_s"):
        if isinstance(f.get("margin"), dict) and k in f["margin"]:
            out[k] = f["margin"][k]
    # LCO: the freeplay band, the onset EAS and the describing-function
    # curve (its largest stable cycle where it crosses the case airspeed).
    band = f["freeplay_band"] or {}
    out["lco_gap_open_flutter_speed_m_s"] = band.get("gap_open_flutter_m_s")
    out["lco_gap_closed_flutter_speed_m_s"] = band.get("gap_closed_flutter_m_s")
    out["lco_onset_eas_m_s"] = (f["margin"] or {}).get("lco_onset_eas_m_s")
    p = f["lco_prediction"]
    if p is not None:
        rng = p["stable_speed_range_m_s"] or [None, None]
        out["lco_df_lowest_stable_speed_m_s"], out["lco_df_highest_stable_speed_m_s"] = rng
        stable = [c for c in p["at_case_airspeed"]["cycles"] if c["stable"]]
        out["lco_df_stable_cycles"] = len(stable)
        big = max(stable, key=lambda c: c["amplitude"]) if stable else None
        unit = "deg" if p["amplitude_units"] == "degree" else "m"
        out[f"lco_df_amplitude_{unit}"] = big and big["amplitude"]
        out["lco_df_frequency_hz"] = big and big["frequency_hz"]
    return out


def gust_fields(case, sets=()):
    """The gust command's critical peaks (default gradients, from rest)."""
    args = ["gust", case, "--json"]
    for s in sets:
        args += ["--set", s]
    r = run(*args)
    if r.returncode != 0:
        return None  # no one-minus-cosine gust: the batch leaves the columns empty
    g = json.loads(r.stdout)
    out = {}
    names = {"plunge": "plunge_m", "pitch": "pitch_rad", "flap": "flap_rad", "lift": "lift_n_per_m",
             "pitching_moment": "pitching_moment_n_m_per_m", "hinge_moment": "hinge_moment_n_m_per_m"}
    for ch, col in names.items():
        c = g["critical"].get(ch)
        out["gust_peak_" + col] = c and c["value"]
        out[f"gust_peak_{ch}_gradient_m"] = c and c["gradient_m"]
    return out


def same_row(what, row_json, row_csv, want):
    for k, v in want.items():
        check(f"{what}: JSON {k}", k in row_json and row_json[k] == v, (row_json.get(k), v))
        if v is None:  # does not apply: null in the JSON, an empty CSV cell
            check(f"{what}: CSV {k} empty", row_csv.get(k) == "", row_csv.get(k))
        else:
            check(f"{what}: CSV {k}", row_csv.get(k) not in (None, "") and float(row_csv[k]) == v,
                  (row_csv.get(k), v))


def read_csv(path):
    with open(path) as fh:
        lines = fh.read().splitlines()
    check("CSV starts with the caution line", lines[0].startswith("# CAUTION"), lines[0][:60])
    return list(csv.DictReader(lines[1:]))


with tempfile.TemporaryDirectory() as tmp:
    # 1. Two case files.
    out = os.path.join(tmp, "two")
    r = run("batch", DEMO, ND, "-o", out)
    check("two cases: exit 0", r.returncode == 0, r.stderr)
    check("two cases: text has the caution", "CAUTION" in r.stdout, r.stdout[-300:])
    j = json.load(open(out + ".json"))
    check("JSON has the caution", "CAUTION" in j.get("caution", ""))
    rows = read_csv(out + ".csv")
    check("two rows", len(rows) == 2 and len(j["cases"]) == 2, (len(rows), len(j["cases"])))
    for k, case in enumerate((DEMO, ND)):
        same_row(os.path.basename(case), j["cases"][k], rows[k], flutter_fields(case))
        check(f"{case}: status ok", rows[k]["status"] == "ok", rows[k]["status"])
    # The gust columns: the demo's one-minus-cosine gust as `aerosect gust`
    # sizes it; the benchmark has no [[gust]] (empty columns, the note says so).
    g = gust_fields(DEMO)
    check("demo: the gust command ran", g is not None)
    same_row("demo gust", j["cases"][0], rows[0], g or {})
    check("demo: gust peaks present", rows[0]["gust_peak_lift_n_per_m"] != "", rows[0])
    check("benchmark: no gust command result", gust_fields(ND) is None)
    check("benchmark: gust columns empty with the reason",
          all(rows[1][c] == "" for c in rows[1] if c.startswith("gust_peak"))
          and rows[1]["gust_note"] == "no [[gust]] in the case", rows[1]["gust_note"])
    # Every column is named with its units in the JSON, or is text/flag.
    check("JSON units of the LCO and gust columns",
          j["units"].get("lco_df_amplitude_deg") == "degree" and j["units"].get("gust_peak_lift_n_per_m") == "N m-1"
          and j["units"].get("gust_peak_pitch_gradient_m") == "m", j["units"])
    # A DF-predicted cycle at the case airspeed (the benchmark's flap freeplay),
    # and where there is none (the demo at 60 m/s) the note says so.
    check("benchmark: a stable DF cycle at the case airspeed", rows[1]["lco_df_amplitude_deg"] != "", rows[1])
    check("demo: no stable DF cycle at 60 m/s, said", rows[0]["lco_df_amplitude_deg"] == ""
          and "no stable predicted LCO at the case airspeed" in rows[0]["lco_note"], rows[0]["lco_note"])
    # A linear case: no LCO prediction, and the reason in the note.
    out = os.path.join(tmp, "linear")
    linear = os.path.join(tmp, "linear.toml")
    with open(ND) as fh, open(linear, "w") as w:
        w.write(fh.read().replace('law = "freeplay"\nhalf_gap_deg = 0.5', 'law = "linear"'))
    r = run("batch", linear, "-o", out)
    check("linear case: exit 0", r.returncode == 0, r.stderr)
    if r.returncode == 0:
        lrow = read_csv(out + ".csv")[0]
        check("linear case: LCO columns empty with the reason",
              lrow["lco_df_amplitude_deg"] == "" and lrow["lco_spring"] == ""
              and "no describing-function prediction: no nonlinear spring" in lrow["lco_note"], lrow["lco_note"])

    # 2. A parameter table over the demo: flap stiffness and mass balance.
    table = os.path.join(tmp, "params.csv")
    with open(table, "w") as fh:
        fh.write("# invented parameter sets\n"
                 "name, flap.frequency_hz, flap.cg_offset\n"
                 "stiff, 30.0, 0.0\n"
                 "\n"
                 "soft, 15.0, 0.01\n")
    out = os.path.join(tmp, "table")
    r = run("batch", DEMO, "--table", table, "-o", out)
    check("table: exit 0", r.returncode == 0, r.stderr)
    if r.returncode == 0:
        j = json.load(open(out + ".json"))
        rows = read_csv(out + ".csv")
        sets = {"stiff": ["flap.frequency_hz=30.0", "flap.cg_offset=0.0"],
                "soft": ["flap.frequency_hz=15.0", "flap.cg_offset=0.01"]}
        check("table: names in order", [x["name"] for x in rows] == ["stiff", "soft"], [x["name"] for x in rows])
        for k, name in enumerate(("stiff", "soft")):
            same_row(f"table row {name}", j["cases"][k], rows[k], flutter_fields(DEMO, sets[name]))
            same_row(f"table row {name} gust", j["cases"][k], rows[k], gust_fields(DEMO, sets[name]) or {})

    # 3. Bad tables: exit 2 naming the file and line; nothing written.
    for text, line, words in (("name, flow.airspeed\na, 30.0, 4\n", 2, ["3 fields"]),
                              ("name, flap.frequncy_hz\na, 30.0\n", 2, ["flap.frequncy_hz"])):
        bad = os.path.join(tmp, "bad.csv")
        with open(bad, "w") as fh:
            fh.write(text)
        out = os.path.join(tmp, "bad_out")
        r = run("batch", DEMO, "--table", bad, "-o", out)
        check(f"bad table ({words[0]}): exit 2", r.returncode == 2, (r.returncode, r.stderr))
        check(f"bad table ({words[0]}): names the file and line", f"bad.csv:{line}" in r.stderr, r.stderr)
        check(f"bad table ({words[0]}): says what", all(w in r.stderr for w in words), r.stderr)
        check(f"bad table ({words[0]}): nothing written", not os.path.exists(out + ".csv"))

print(f"{len(failures)} failures" if failures else "all passed")
sys.exit(1 if failures else 0)

#!/usr/bin/python3
"""End-to-end test of `aerosect batch` (issue #17 scope 4).

    test_batch.py AEROSECT SOURCE_DIR

Checks:
  - two case files in one call: each summary row (CSV and JSON) holds the
    very numbers `aerosect flutter CASE --json` prints for that case (equal
    as doubles: the CSV carries 17 significant digits);
  - a parameter table over one case: each row equals `aerosect flutter`
    with the same overrides as --set, named by the table's name column;
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
    return out


def same_row(what, row_json, row_csv, want):
    for k, v in want.items():
        check(f"{what}: JSON {k}", row_json.get(k) == v, (row_json.get(k), v))
        check(f"{what}: CSV {k}", row_csv.get(k) not in (None, "") and float(row_csv[k]) == v, (row_csv.get(k), v))


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

#!/usr/bin/python3
"""End-to-end checks that `aerosect sweep` never gives a false answer
(issue #14 scope 3; README, "LCO sweeps").

1. The shipped demo case (cases/demo_aileron.toml: 3 s runs, a 1-cos gust)
   swept with its own run length over 20..25 m/s, up and down, shows its
   flap LCO at every point: class periodic, the gust left out (said in the
   text, the JSON and the map's `gusts` attribute), and the amplitude equal
   to that of a 60 s time march of the same case without the gust (read
   from the time history sampled at 10 kHz over its last 10 s: an
   independent path through `simulate`), to the tolerance stated below.
2. A case whose cycle settles slowly (the 2-DOF benchmark section of Lee,
   Price & Wong 1999 with a hardening cubic pitch spring just above its
   linear flutter speed U* = 6.2851, where the approach to the small cycle
   is slow: Hopf normal form, Kuznetsov ch. 3) with 100-semichord runs:
   both points are extended to the cap (10 x the run length) and classed
   unsettled (code 5 in the map), with a warning in the text and the JSON.

Usage: test_sweep_settling.py AEROSECT SOURCE_DIR
"""
import json
import os
import re
import subprocess
import sys
import tempfile

import h5py
import numpy as np

EXE, SRC = sys.argv[1], sys.argv[2]
DEMO = os.path.join(SRC, "cases", "demo_aileron.toml")
failures = []


def check(what, cond, detail=""):
    print(("ok   " if cond else "FAIL ") + what + ("" if cond else f": {detail}"))
    if not cond:
        failures.append(what)


def run(*args):
    return subprocess.run([EXE, *args], capture_output=True, text=True, timeout=600)


# Agreement of the sweep's LCO amplitude with the long march. The long march
# has settled to better than 1e-8 over its last 40 s (measured: the 10 s
# windows at 20, 40 and 50 s agree to 6e-10 relative) and its 10 kHz
# samples miss a peak by at most (2 pi f dt)^2 / 2 = 2.6e-7 relative at
# f = 3.6 Hz; the sweep's points are refined to the periodic orbit (README:
# residual 1e-8, flows at rtol 1e-10), so 1e-6 is the stated bound (the
# marched cycle alone, settled to 1e-4, was 1.1e-6 to 8.5e-5 off).
AMPLITUDE_RTOL = 1e-6

with tempfile.TemporaryDirectory() as tmp:
    # --- 1. the demo's LCO at 20-25 m/s with its own run length -------------
    out = os.path.join(tmp, "demo_map.h5")
    r = run("sweep", DEMO, "--vary", "flow.airspeed=20:25:3", "-o", out, "--jobs", "2")
    check("demo sweep runs", r.returncode == 0, r.stderr)
    check("text: LCO onset going up at 20", "LCO onset going up: 20 m s-1\n" in r.stdout, r.stdout)
    check("text: LCO persists going down to 20", "LCO persists going down to: 20 m s-1\n" in r.stdout, r.stdout)
    check("text: the gust left out", "gusts: left out" in r.stdout, r.stdout)
    check("text: no 'no LCO'", "no LCO" not in r.stdout, r.stdout)
    with h5py.File(out) as f:
        cls = f["response_class"][()]
        amp = f["flap_amplitude"][()]
        speeds = f["flow_airspeed"][()]
        gusts = f.attrs["gusts"]
        gusts = gusts.decode() if isinstance(gusts, bytes) else str(gusts)
    check("map: every point periodic", np.all(cls == 1), cls)
    with h5py.File(out) as f:
        check("map: every point refined to its orbit", np.all(f["refined"][()] == 1), f["refined"][()])
        check("map: Newton residual <= 1e-8", np.all(f["orbit_residual"][()] <= 1e-8), f["orbit_residual"][()])
        check("map: stable orbits (largest non-trivial multiplier < 1)", np.all(f["floquet_multiplier"][()] < 1),
              f["floquet_multiplier"][()])
    check("map: gusts attribute says left out", gusts.startswith("left out"), gusts)
    os.remove(out)
    r = run("sweep", DEMO, "--vary", "flow.airspeed=20:25:3", "-o", out, "--jobs", "2", "--json")
    j = json.loads(r.stdout)
    check("json: gusts_included false", j["gusts_included"] is False, j.get("gusts_included"))
    check("json: no unsettled point, no warning", j["unsettled_points"] == 0 and j["warnings"] == [], j["warnings"])

    # The reference: the demo case without its gust, 60 s at 10 kHz.
    text = open(DEMO).read()
    text = text[: text.index("[[gust]]")]
    text = re.sub(r"(?m)^duration = .*$", "duration = 60.0", text)
    text = re.sub(r"(?m)^sample_rate = .*$", "sample_rate = 10000.0", text)
    long_case = os.path.join(tmp, "long.toml")
    with open(long_case, "w") as fh:
        fh.write(text)
    for k, u in enumerate(speeds):
        if u not in (20.0, 25.0):
            continue
        h = os.path.join(tmp, f"long{u:g}.h5")
        r = run("simulate", long_case, "-o", h, "--set", f"flow.airspeed={u:g}")
        check(f"long march at {u:g} m/s", r.returncode == 0, r.stderr)
        with h5py.File(h) as f:
            t, x = f["time"][()], f["flap"][()]
        last = t >= 50.0
        ref = 0.5 * (x[last].max() - x[last].min())
        check(f"long march at {u:g} m/s is an LCO of about 0.55 deg", 0.5 < np.degrees(ref) < 0.6, np.degrees(ref))
        for d, name in enumerate(("up", "down")):
            rel = abs(amp[d, k] - ref) / ref
            check(f"{name} {u:g} m/s: flap amplitude {np.degrees(amp[d, k]):.6f} deg = long march "
                  f"{np.degrees(ref):.6f} deg to {AMPLITUDE_RTOL:g} (relative {rel:.1e})", rel <= AMPLITUDE_RTOL)

    # --- 2. a slowly settling cycle: unsettled, with a warning --------------
    cubic = os.path.join(SRC, "tests", "regression", "cases", "lpw_cubic.toml")
    out = os.path.join(tmp, "slow.h5")
    args = ["sweep", cubic, "--vary", "nondimensional.reduced_speed=6.3:6.35:2", "--direction", "up",
            "--restart", "fresh", "--set", "simulation.duration_semichords=100", "-o", out]
    r = run(*args)
    check("slow case runs", r.returncode == 0, r.stderr)
    check("text: unsettled class shown", r.stdout.count(" unsettled ") == 2, r.stdout)
    check("text: warning", "warning: 2 points did not settle within 10 times" in r.stdout, r.stdout)
    with h5py.File(out) as f:
        check("map: class code 5", np.all(f["response_class"][0] == 5), f["response_class"][()])
        end = f["end_time"][0]
    os.remove(out)
    r = run(*args, "--json")
    j = json.loads(r.stdout)
    check("json: unsettled_points 2", j["unsettled_points"] == 2, j["unsettled_points"])
    check("json: one warning", len(j["warnings"]) == 1 and "did not settle" in j["warnings"][0], j["warnings"])
    check("json: class unsettled, code 5",
          all(p["class"] == "unsettled" and p["class_code"] == 5 for p in j["points"]), j["points"])
    check("json: run cap factor 10", j["run_cap_factor"] == 10, j["run_cap_factor"])
    # The runs were extended to the cap: 10 x 100 semichords, in seconds as
    # `simulate` gives 1000 semichords at U* = 6.3.
    h = os.path.join(tmp, "cap.h5")
    r = run("simulate", cubic, "-o", h, "--json", "--set", "simulation.duration_semichords=1000",
            "--set", "nondimensional.reduced_speed=6.3")
    cap = json.loads(r.stdout)["end_time_s"]
    check("runs extended to 10 x the run length", np.allclose(end[0], cap, rtol=1e-9), (end, cap))

if failures:
    print(f"{len(failures)} check(s) failed")
    sys.exit(1)
print("all checks passed")

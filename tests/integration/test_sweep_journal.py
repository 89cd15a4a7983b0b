#!/usr/bin/python3
"""Sweep journals under damage and changed inputs, end to end.

- A sweep refused for a bad swept value leaves no journal, lock or map, and
  the corrected command then runs (it is not refused as "a different sweep").
- Damaged lines anywhere after the head (one byte changed in the first point,
  garbage with a NUL in the middle, two lines joined by a lost newline, a
  bare `{}`, every point line) are skipped, counted and reported on stderr;
  every intact point before and after them is resumed, and the map equals
  an uninterrupted run's, dataset by dataset.
- A damaged head is refused (exit 2, naming the journal) and the journal is
  left as it was.
- The journal's identity covers the recorded-gust file's contents: after the
  file changed, the resumed sweep is refused naming what differs, the journal
  untouched; with the file restored the sweep resumes.
The closing line counts the journals tried, crashes, hangs and damaged
(changed by a refused run) journals.
"""
import json
import os
import signal
import subprocess
import sys
import tempfile
import time

import h5py
import numpy as np
from files import digest, same_files

BIN, SRC = os.path.abspath(sys.argv[1]), os.path.abspath(sys.argv[2])
DEMO = os.path.join(SRC, "cases", "demo_aileron.toml")
CRASH_SIGNS = ("terminate called", "Sanitizer", "runtime error:", "internal error", "Segmentation",
               "core dumped", "Aborted", "what():")
passed = failed = 0
tally = {"tried": 0, "crashes": 0, "hangs": 0, "damaged": 0}


def check(name, cond, detail=""):
    global passed, failed
    if cond:
        passed += 1
    else:
        failed += 1
        print(f"FAIL {name}: {detail}")


def run(args, timeout=600):
    tally["tried"] += 1
    try:
        r = subprocess.run([BIN, *args], capture_output=True, text=True, timeout=timeout)
    except subprocess.TimeoutExpired:
        tally["hangs"] += 1
        return None
    crashed = r.returncode < 0 or r.returncode > 128 or any(s in r.stderr for s in CRASH_SIGNS)
    tally["crashes"] += crashed
    check(f"{' '.join(args[:2])}: no crash", not crashed, (r.returncode, r.stderr[-500:]))
    return r


def interrupted_journal(args, out, points):
    """Runs the sweep, stops it with SIGINT once `points` points are journaled."""
    journal = out + ".journal"
    p = subprocess.Popen([BIN, *args, "-o", out], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    t0 = time.time()
    while time.time() - t0 < 300 and p.poll() is None:
        if os.path.exists(journal) and open(journal, "rb").read().count(b"\n") >= points + 1:
            break
        time.sleep(0.01)
    p.send_signal(signal.SIGINT)
    p.communicate(timeout=300)
    with open(journal, "rb") as f:
        return f.read().split(b"\n")[:-1]


with tempfile.TemporaryDirectory() as tmp:
    # --------------------------------------------- refused before the journal
    bad = os.path.join(tmp, "bad.h5")
    r = run(["sweep", DEMO, "--vary", "flow.airspeed=20:2000:3", "-o", bad])
    check("bad swept value: exit 2 naming the key", r and r.returncode == 2 and "flow.airspeed" in r.stderr,
          r and r.stderr)
    left = [n for n in os.listdir(tmp) if n.startswith("bad.h5")]
    check("bad swept value: no journal, lock or map left", not left, left)
    r = run(["sweep", DEMO, "--vary", "flow.airspeed=20:60:3", "-o", bad, "--set", "simulation.duration=0.5"])
    check("corrected command runs", r and r.returncode == 0, r and r.stderr)

    # ---------------------------------------------------------- damaged lines
    args = ["sweep", DEMO, "--vary", "flow.airspeed=20:60:8", "--direction", "up", "--jobs", "1", "--json",
            "--set", "simulation.duration=5", "--set", "simulation.max_step=1e-5",
            # max_step slows only the adaptive steppers (the sweep leaves the
            # gust out, so "auto" would propagate exactly, in milliseconds)
            "--set", "simulation.stepper=dopri5"]
    ref = os.path.join(tmp, "ref.h5")
    r = run([*args, "-o", ref])
    check("uninterrupted sweep", r and r.returncode == 0, r and r.stderr)
    lines = interrupted_journal(args, os.path.join(tmp, "cut.h5"), 5)
    head, points = lines[0], lines[1:]
    check("interrupted sweep journaled points", len(points) >= 5, len(points))
    check("every journal line is one JSON object", all(isinstance(json.loads(l), dict) for l in lines))

    def flip_digit(line):
        i = line.index(b'"value1":') + len(b'"value1":')
        c = line[i:i + 1]
        return line[:i] + (b"3" if c != b"3" else b"4") + line[i + 1:]

    variants = {
        "one byte changed in the first point": ([head, flip_digit(points[0]), *points[1:]], 1, 1),
        "garbage with a NUL in the middle": ([head, *points[:2], b"\x00\x1b[2J garbage", *points[2:]], 1, 0),
        "two lines joined (a lost newline)": ([head, points[0], points[1] + points[2], *points[3:]], 1, 2),
        "a bare {} line": ([head, *points[:1], b"{}", *points[1:]], 1, 0),
        "every point line damaged": ([head, *[p[:-3] + b'x"}' for p in points]], len(points), len(points)),
    }
    for k, (name, (content, n_damaged, n_lost)) in enumerate(variants.items()):
        out = os.path.join(tmp, f"damaged{k}.h5")
        with open(out + ".journal", "wb") as f:
            f.write(b"\n".join(content) + b"\n")
        r = run([*args, "-o", out])
        if r is None:
            check(f"{name}: answers", False, "hang")
            continue
        check(f"{name}: exit 0", r.returncode == 0, r.stderr[-800:])
        check(f"{name}: counted on stderr", f"{n_damaged} damaged line(s) skipped" in r.stderr, r.stderr[-800:])
        if r.returncode == 0:
            resumed = json.loads(r.stdout)["points_resumed"]
            check(f"{name}: every intact point resumed", resumed == len(points) - n_lost,
                  (resumed, len(points), n_lost))
            ok, why = same_files(ref, out, attributes=False)
            check(f"{name}: map equals the uninterrupted map", ok, why)

    out = os.path.join(tmp, "badhead.h5")
    with open(out + ".journal", "wb") as f:
        f.write(b"\n".join([head[:20] + b"\x00" + head[21:], *points]) + b"\n")
    before = digest(out + ".journal")
    r = run([*args, "-o", out])
    check("damaged head: refused naming the journal", r and r.returncode == 2 and "badhead.h5.journal" in r.stderr,
          r and r.stderr)
    kept = digest(out + ".journal") == before
    tally["damaged"] += not kept
    check("damaged head: journal left as it was", kept)

    # ------------------------------------------- the identity covers the gust file
    csv = os.path.join(tmp, "gust.csv")
    with open(csv, "w") as f:
        f.write("time,velocity\n0,0\n0.05,0.5\n0.1,0\n")
    gcase = os.path.join(tmp, "gust_case.toml")
    with open(gcase, "w") as f:
        f.write(open(DEMO).read() + '\n[[gust]]\nshape = "recorded"\nfile = "gust.csv"\n')
    gargs = ["sweep", gcase, *args[2:]]
    gout = os.path.join(tmp, "gust_map.h5")
    glines = interrupted_journal(gargs, gout, 3)
    check("gust sweep interrupted with points", len(glines) >= 4, len(glines))
    with open(csv, "w") as f:
        f.write("time,velocity\n0,0\n0.05,0.9\n0.1,0\n")
    before = digest(gout + ".journal")
    r = run([*gargs, "-o", gout])
    check("gust file changed: resume refused", r and r.returncode == 2 and "different sweep" in r.stderr and
          "recorded_gusts" in r.stderr, r and r.stderr)
    kept = digest(gout + ".journal") == before
    tally["damaged"] += not kept
    check("gust file changed: journal left as it was", kept)
    with open(csv, "w") as f:
        f.write("time,velocity\n0,0\n0.05,0.5\n0.1,0\n")
    r = run([*gargs, "-o", gout])
    check("gust file restored: the sweep resumes", r and r.returncode == 0 and
          json.loads(r.stdout)["points_resumed"] == len(glines) - 1, r and (r.stderr, r.stdout[:200]))

print(f"{tally['tried']} runs tried, {tally['crashes']} crashes, {tally['hangs']} hangs, "
      f"{tally['damaged']} journals changed by a refused run")
print(f"{passed} passed, {failed} failed")
sys.exit(1 if failed else 0)

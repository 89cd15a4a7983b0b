#!/usr/bin/python3
"""End-to-end checks that results survive interruptions and failures.

- SIGINT / SIGTERM to simulate: exit 128 + signal (130, 143), the partial
  run kept as NAME.incomplete.h5 (readable, complete = 0), an older complete
  NAME.h5 untouched.
- SIGINT / SIGTERM / kill -9 to sweep: every journaled point kept, the rerun
  resumes without recomputing them and writes a map equal, dataset by
  dataset, to an uninterrupted run's.
- A failed run (bad input, numerical trouble, a write refused) leaves an
  existing result untouched.
- Unwritable places and writes refused for lack of room give exit 4 and one
  line naming the file, for simulate, flutter -o, gust -o, sweep and merge.
  The tests run as root in CI, where permissions do not stop writes: the
  places are a path under a regular file (/etc/passwd/x.h5) and a missing
  directory; a full disk is imitated by the file size limit (RLIMIT_FSIZE;
  the program itself ignores SIGXFSZ so that writes fail with EFBIG: the
  child starts with the signal's default action, as from a shell), which the
  free-space check cannot see coming.
"""
import json
import os
import resource
import signal
import subprocess
import sys
import tempfile
import time

import h5py
import numpy as np
from files import digest, same_files

BIN, SRC = sys.argv[1], sys.argv[2]
DEMO = os.path.join(SRC, "cases", "demo_aileron.toml")
passed = failed = 0


# Light workloads: these tests are about files, not about the analyses (the
# sanitizer build runs them about ten times slower).
QUICK_FLUTTER = ["--speeds", "5:150:60", "--method", "state-space"]
QUICK_GUST = ["--gradients", "9.144:106.68:3"]


def check(name, cond, detail=""):
    global passed, failed
    if cond:
        passed += 1
    else:
        failed += 1
        print(f"FAIL {name}: {detail}")


def run(*args, limit=None):
    pre = None
    if limit is not None:
        def pre():
            # SIGXFSZ stays at its default action (subprocess restores it in
            # the child): the program must ignore it itself.
            resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))
    return subprocess.run([BIN, *args], capture_output=True, text=True, timeout=300, preexec_fn=pre)


def journal_lines(path):
    with open(path, "rb") as f:
        return f.read().split(b"\n")


def wait_for(cond, proc, timeout=60):
    t0 = time.time()
    while not cond():
        if proc.poll() is not None or time.time() - t0 > timeout:
            return False
        time.sleep(0.01)
    return True


with tempfile.TemporaryDirectory() as tmp:
    # ---------------------------------------------------------------- simulate
    # Long enough to be interrupted: 60 s of response at steps <= 1e-5 s.
    long_run = ["--set", "simulation.duration=60", "--set", "simulation.max_step=1e-5",
                "--set", "simulation.stepper=dopri5"]  # max_step slows adaptive steppers only
    for sig, status in ((signal.SIGINT, 130), (signal.SIGTERM, 143)):
        out = os.path.join(tmp, f"sim_{sig.name}.h5")
        r = run("simulate", DEMO, "-o", out, "--set", "simulation.duration=0.2")
        check(f"{sig.name}: earlier complete run", r.returncode == 0, r.stderr)
        before = digest(out)
        p = subprocess.Popen([BIN, "simulate", DEMO, "-o", out, *long_run],
                             stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
        started = wait_for(lambda: os.path.exists(out + ".part"), p)
        time.sleep(0.5)
        p.send_signal(sig)
        _, err = p.communicate(timeout=60)
        check(f"{sig.name}: simulate was running when signalled", started)
        check(f"{sig.name}: simulate exit {status}", p.returncode == status, (p.returncode, err))
        partial = os.path.join(tmp, f"sim_{sig.name}.incomplete.h5")
        check(f"{sig.name}: partial file kept", os.path.exists(partial), os.listdir(tmp))
        check(f"{sig.name}: message names the partial file", partial in err, err)
        check(f"{sig.name}: no temporary file left", not os.path.exists(out + ".part"))
        check(f"{sig.name}: complete file untouched", digest(out) == before)
        if os.path.exists(partial):
            with h5py.File(partial) as f:
                n = len(f["time"])
                t = f["time"][()]
                check(f"{sig.name}: partial marked incomplete",
                      int(f.attrs["complete"]) == 0 and str(f.attrs["status"]) == "cancelled",
                      dict(f.attrs))
                check(f"{sig.name}: partial rows agree", n > 0 and int(f.attrs["samples"]) == n
                      and len(f["pitch"]) == n, (n, f.attrs["samples"]))
                check(f"{sig.name}: partial stops before the end", 0 < t[-1] < 60.0
                      and np.all(np.diff(t) > 0), t[-1])
        with h5py.File(out) as f:
            check(f"{sig.name}: complete file still complete", int(f.attrs["complete"]) == 1)

    # ------------------------------------------------------------------- sweep
    # 10 speeds x 2 directions, steps <= 1e-5 s (5 s runs): long enough to stop
    # mid-sweep, short enough under the sanitizers (about 10 times slower).
    sweep_args = ["sweep", DEMO, "--vary", "flow.airspeed=20:60:10", "--jobs", "2", "--json",
                  "--set", "simulation.duration=5", "--set", "simulation.max_step=1e-5",
                  "--set", "simulation.stepper=dopri5"]  # max_step slows adaptive steppers only
    n_points = 20
    ref = os.path.join(tmp, "ref.h5")
    r = run(*sweep_args, "-o", ref)
    check("uninterrupted sweep", r.returncode == 0, r.stderr)
    check("uninterrupted sweep computed all", json.loads(r.stdout)["points_resumed"] == 0)

    for sig, status in ((signal.SIGINT, 130), (signal.SIGTERM, 143), (signal.SIGKILL, -9)):
        name = sig.name
        out = os.path.join(tmp, f"map_{name}.h5")
        journal = out + ".journal"
        p = subprocess.Popen([BIN, *sweep_args, "-o", out], stdout=subprocess.PIPE,
                             stderr=subprocess.PIPE, text=True)
        # Stop after a few points have been journaled.
        started = wait_for(lambda: os.path.exists(journal) and len(journal_lines(journal)) >= 5, p)
        threads = len(os.listdir(f"/proc/{p.pid}/task")) if p.poll() is None else 0
        p.send_signal(sig)
        _, err = p.communicate(timeout=120)
        check(f"{name}: sweep was running when signalled", started)
        check(f"{name}: sweep exit status", p.returncode == status, (p.returncode, err))
        check(f"{name}: no map written", not os.path.exists(out))
        lines = journal_lines(journal)
        # Complete lines end in a newline: the last element after split is empty
        # unless the kill cut a line.
        complete = lines[:-1]
        cut = lines[-1] != b""
        kept = len(complete) - 1  # the first line identifies the sweep
        parsed = all(json.loads(l) is not None for l in complete)
        check(f"{name}: journal lines parse", parsed)
        check(f"{name}: some points kept, some left", 0 < kept < n_points, kept)
        if sig == signal.SIGKILL:
            # In flight at the kill: at most one point per thread (each thread
            # runs one point at a time and journals it before the next).
            check("kill -9: at most --jobs threads computing", 0 < threads <= 2, threads)
        else:
            check(f"{name}: message counts the kept points", f"{kept} finished points kept" in err, err)
            check(f"{name}: no line cut", not cut, lines[-1][:80])
        r = run(*sweep_args, "-o", out)
        check(f"{name}: rerun exit 0", r.returncode == 0, r.stderr)
        j = json.loads(r.stdout) if r.returncode == 0 else {}
        # Nothing journaled is recomputed: the rerun reads every kept point and
        # computes only the others.
        check(f"{name}: rerun resumes every kept point", j.get("points_resumed") == kept,
              (j.get("points_resumed"), kept))
        check(f"{name}: rerun has every point", j.get("points_computed") == n_points)
        check(f"{name}: rerun says it resumes", f"resuming: {kept} finished points" in r.stderr, r.stderr)
        check(f"{name}: journal removed", not os.path.exists(journal))
        if os.path.exists(out):
            ok, why = same_files(ref, out)
            check(f"{name}: resumed map equals the uninterrupted map", ok, why)
        print(f"{name}: {kept} of {n_points} points kept, {n_points - kept} computed on resume"
              + (f", {threads} threads at the kill" if sig == signal.SIGKILL else ""))

    # A journal whose last line was cut (kill -9 while writing) resumes from
    # the complete lines and the cut is dropped.
    out = os.path.join(tmp, "cut.h5")
    p = subprocess.Popen([BIN, *sweep_args, "-o", out], stdout=subprocess.PIPE,
                         stderr=subprocess.PIPE, text=True)
    wait_for(lambda: os.path.exists(out + ".journal") and len(journal_lines(out + ".journal")) >= 4, p)
    p.send_signal(signal.SIGINT)
    p.communicate(timeout=120)
    lines = journal_lines(out + ".journal")
    with open(out + ".journal", "ab") as f:
        f.write(lines[-2][: len(lines[-2]) // 2])  # half a point, no newline
    r = run(*sweep_args, "-o", out)
    check("cut line: rerun exit 0", r.returncode == 0, r.stderr)
    check("cut line: dropped and reported", "after the last complete point" in r.stderr, r.stderr)
    if r.returncode == 0:
        check("cut line: resumed the complete points",
              json.loads(r.stdout)["points_resumed"] == len(lines) - 2)
        ok, why = same_files(ref, out)
        check("cut line: map equals the uninterrupted map", ok, why)

    # ------------------------------------------ failed runs leave results alone
    soft = os.path.join(tmp, "soft.toml")  # softening cubic: finite-time blow-up
    with open(soft, "w") as f:
        f.write("[nondimensional]\nmass_ratio = 100.0\nelastic_axis = -0.5\ncg_offset = 0.25\n"
                "radius_of_gyration = 0.5\nfrequency_ratio = 0.2\nreduced_speed = 4.0\n"
                "[springs.pitch]\nlaw = \"cubic\"\ncubic_coefficient = -10.0\n"
                "[initial]\npitch_deg = 30.0\n[simulation]\nduration_semichords = 200\n")
    sim = os.path.join(tmp, "keep.h5")
    run("simulate", DEMO, "-o", sim, "--set", "simulation.duration=0.5")
    fl = os.path.join(tmp, "keep_flutter.h5")
    run("flutter", DEMO, "-o", fl, *QUICK_FLUTTER)
    gu = os.path.join(tmp, "keep_gust.h5")
    run("gust", DEMO, "-o", gu, *QUICK_GUST)
    small_sweep = ["--vary", "flow.airspeed=20:60:3", "--set", "simulation.duration=2", "--jobs", "2"]
    mp = os.path.join(tmp, "keep_map.h5")
    run("sweep", DEMO, *small_sweep, "-o", mp)
    shards = []
    for k in (1, 2):
        shards.append(os.path.join(tmp, f"shard{k}.h5"))
        run("sweep", DEMO, *small_sweep, "--shard", f"{k}/2", "-o", shards[-1])
    mg = os.path.join(tmp, "keep_merged.h5")
    run("merge", *shards, "-o", mg)
    kept_files = [sim, fl, gu, mp, mg]
    digests = {f: digest(f) for f in kept_files}
    failing = [
        ("simulate, bad input", ["simulate", DEMO, "-o", sim, "--set", "section.mass=-1"], 2, None),
        ("simulate, numerical trouble", ["simulate", soft, "-o", sim], 3, None),
        ("simulate, write refused", ["simulate", DEMO, "-o", sim], 4, 100000),
        ("flutter, bad input", ["flutter", DEMO, "-o", fl, "--speeds", "9:1:3"], 2, None),
        ("flutter, write refused", ["flutter", DEMO, "-o", fl, *QUICK_FLUTTER], 4, 4096),
        ("gust, write refused", ["gust", DEMO, "-o", gu, *QUICK_GUST], 4, 4096),
        ("sweep, bad input", ["sweep", DEMO, "--vary", "flow.airspeed=60:20:3", "-o", mp], 2, None),
        ("sweep, write refused", ["sweep", DEMO, *small_sweep, "-o", mp], 4, 0),
        ("merge, shard missing", ["merge", shards[0], "-o", mg], 2, None),
        ("merge, write refused", ["merge", *shards, "-o", mg], 4, 4096),
    ]
    for label, args, status, limit in failing:
        r = run(*args, limit=limit)
        check(f"{label}: exit {status}", r.returncode == status, (r.returncode, r.stderr))
    for f in kept_files:
        check(f"{os.path.basename(f)} untouched by the failed runs", digest(f) == digests[f])
        check(f"{os.path.basename(f)}: no temporary left", not os.path.exists(f + ".part"))
    r = run("simulate", soft, "-o", sim)
    check("numerical trouble named", "step size collapsed" in r.stderr and "pitch = " in r.stderr
          and "keep.incomplete.h5" in r.stderr, r.stderr)
    for f in (mp + ".journal",):
        if os.path.exists(f):
            os.remove(f)

    # ----------------------------------------- unwritable places, refused writes
    def commands(target):
        return {
            "simulate": ["simulate", DEMO, "-o", target, "--set", "simulation.duration=2"],
            "flutter": ["flutter", DEMO, "-o", target, *QUICK_FLUTTER],
            "gust": ["gust", DEMO, "-o", target, *QUICK_GUST],
            "sweep": ["sweep", DEMO, *small_sweep, "-o", target],
            "merge": ["merge", *shards, "-o", target],
        }

    for place in ("/etc/passwd/x.h5", os.path.join(tmp, "no", "such", "dir", "x.h5")):
        for cmd, args in commands(place).items():
            r = run(*args)
            lines = r.stderr.strip().splitlines()
            check(f"{cmd} -o {place}: exit 4", r.returncode == 4, (r.returncode, r.stderr))
            # One message (wrapped at 100 columns by the CLI, so up to 3 lines),
            # not a cascade of library error stacks.
            message = " ".join(line.strip() for line in lines)
            check(f"{cmd} -o {place}: one short message naming the file",
                  len(lines) <= 3 and all(len(line) <= 100 for line in lines)
                  and message.startswith("aerosect: cannot write '")
                  and os.path.dirname(place) in message, r.stderr)
    full_dir = os.path.join(tmp, "full")
    os.mkdir(full_dir)
    for limit in (0, 4096, 20000):
        for cmd, args in commands(os.path.join(full_dir, f"{limit}.h5")).items():
            r = run(*args, limit=limit)
            if r.returncode == 0:  # small enough for this limit
                continue
            lines = r.stderr.strip().splitlines()
            check(f"{cmd} at file size limit {limit}: exit 4", r.returncode == 4,
                  (r.returncode, r.stderr))
            message = " ".join(line.strip() for line in lines)
            check(f"{cmd} at file size limit {limit}: one short message naming the file",
                  len(lines) <= 3 and all(len(line) <= 100 for line in lines)
                  and f"{limit}.h5" in message and "File too large" in message, r.stderr)
            left = [f for f in os.listdir(full_dir) if f.endswith(".part")]
            check(f"{cmd} at file size limit {limit}: no temporary left", not left, left)
    # The map could not be written, but the journal holds every point: the
    # rerun with room computes nothing again.
    target = os.path.join(full_dir, "20000.h5")
    r0 = run(*commands(target)["sweep"], limit=20000)
    check("sweep at 20000 B: the map is refused", r0.returncode == 4 and os.path.exists(target + ".journal"),
          r0.stderr)
    r = run(*commands(target)["sweep"], "--json")
    check("sweep with room again: every point resumed", r.returncode == 0 and
          json.loads(r.stdout)["points_resumed"] == 6, (r.returncode, r.stderr))
    ok, why = same_files(mp, target) if r.returncode == 0 else (False, "no map")
    check("sweep with room again: map equals an uninterrupted one", ok, why)

    # ------------------------------------ numerical trouble and divergence class
    lin = os.path.join(tmp, "linear.toml")
    with open(lin, "w") as f:
        f.write("[nondimensional]\nmass_ratio = 100.0\nelastic_axis = -0.5\ncg_offset = 0.25\n"
                "radius_of_gyration = 0.5\nfrequency_ratio = 0.2\nreduced_speed = 4.0\n"
                "[initial]\npitch_deg = 1.0\n[simulation]\nduration_semichords = 3000\n")
    # Above the linear flutter speed U* = 6.2851 of this section (Lee, Price
    # & Wong 1999) the response grows until the LCO detector's amplitude
    # limit: class divergent, not a failure and not a crash.
    r = run("sweep", lin, "--vary", "nondimensional.reduced_speed=7:8:2", "--direction", "up",
            "--restart", "fresh", "-o", os.path.join(tmp, "div.h5"), "--json")
    check("divergent sweep exit 0", r.returncode == 0, r.stderr)
    if r.returncode == 0:
        pts = json.loads(r.stdout)["points"]
        check("divergent class", all(p["class"] == "divergent" and p["ok"] for p in pts), pts)
    with h5py.File(os.path.join(tmp, "div.h5")) as f:
        check("divergent class code 3 in the map", np.all(f["response_class"][0, :] == 3),
              f["response_class"][()])
    nan_case = os.path.join(tmp, "nan.toml")
    with open(nan_case, "w") as f:
        f.write(open(soft).read().replace("cubic_coefficient = -10.0", "cubic_coefficient = 1e300")
                .replace("pitch_deg = 30.0", "pitch_deg = 80.0"))
    r = run("simulate", nan_case, "-o", os.path.join(tmp, "nan.h5"))
    check("NaN state: exit 3", r.returncode == 3, (r.returncode, r.stderr))
    check("NaN state: time and components named", "numerical trouble at t = 0 s: non-finite state" in r.stderr
          and "pitch_velocity = " in r.stderr and "nan" in r.stderr, r.stderr)

print(f"{passed} passed, {failed} failed")
sys.exit(1 if failed else 0)

#!/usr/bin/python3
"""One SIGINT and one SIGTERM to each long-running command, mid-run.

    test_interrupt.py AEROSECT SOURCE_DIR

For simulate, flutter, gust, sweep, merge and study (a stage of the engine,
and the figures stage, where the plotting tool runs as a child process) the
program is started, left until its signal handlers are installed (SigCgt in
/proc/PID/status) and it is busy, and then sent ONE signal. Checks, per
command and signal (README, "Exit status and interruption"):
  - exit status 128 + signal: 130 for SIGINT, 143 for SIGTERM, within a
    bounded time (the engine polls its cancel flag between speeds, gust
    gradients, sweep points, shards and study stages, and inside every run);
  - one line on stderr saying what was interrupted and what is kept;
  - no temporary file left (`*.part*`, the study's `.figures-*` staging
    directory) and no half-written figure in the study directory;
  - what is promised is kept: an existing complete output of flutter, gust
    and merge is untouched (same bytes); simulate keeps NAME.incomplete.h5;
    the sweep journal keeps its finished points (complete lines, the head
    first); an interrupted study keeps the files it finished, its
    summary.json says "completed": false for an engine stage, and no
    report.html is written.
A command that finished before the signal could be sent makes the check
fail (the workload is too short to say anything), never pass.
Common practice, no source: a long batch job must stop on request and
leave no damaged files.
"""
import json
import os
import signal
import stat
import subprocess
import sys
import tempfile
import time
from files import digest

BIN, SRC = sys.argv[1], sys.argv[2]
DEMO = os.path.join(SRC, "cases", "demo_aileron.toml")
TRIMMED = os.path.join(SRC, "cases", "demo_aileron_trimmed.toml")
passed = failed = 0
SIGNALS = ((signal.SIGINT, 130), (signal.SIGTERM, 143))


def check(name, cond, detail=""):
    global passed, failed
    if cond:
        passed += 1
    else:
        failed += 1
        print(f"FAIL {name}: {detail}")


def handlers_installed(pid):
    """True once the process catches SIGINT and SIGTERM (its handlers are in)."""
    try:
        with open(f"/proc/{pid}/status") as f:
            for line in f:
                if line.startswith("SigCgt:"):
                    mask = int(line.split()[1], 16)
                    return all(mask & (1 << (s - 1)) for s in (signal.SIGINT, signal.SIGTERM))
    except OSError:
        pass
    return False


def wait_for(cond, proc, timeout=120):
    t0 = time.time()
    while not cond():
        if proc.poll() is not None or time.time() - t0 > timeout:
            return False
        time.sleep(0.02)
    return True


def leftovers(directory):
    """Temporary files and staging directories under `directory`."""
    found = []
    for root, dirs, files in os.walk(directory):
        for n in dirs + files:
            if ".part" in n or n.startswith(".figures-"):
                found.append(os.path.join(root, n))
    return found


def interrupt(name, args, sig, ready=None, settle=0.5, env=None):
    """Starts `aerosect ARGS`, waits until its handlers are in and `ready()`
    (when given) holds, then `settle` s more, sends `sig` once; returns
    (was running when signalled, exit status, stderr)."""
    p = subprocess.Popen([BIN, *args], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
    ok = wait_for(lambda: handlers_installed(p.pid), p)
    if ok and ready is not None:
        ok = wait_for(ready, p, timeout=600)
    if ok:
        time.sleep(settle)
    running = p.poll() is None
    if running:
        p.send_signal(sig)
    try:
        _, err = p.communicate(timeout=300)
    except subprocess.TimeoutExpired:
        p.kill()
        _, err = p.communicate()
        err = "(did not stop within 300 s of the signal) " + err
    check(f"{name}: still running when signalled (workload long enough)", ok and running, err[-500:])
    return running, p.returncode, err


def expect_status(name, status, want, err):
    check(f"{name}: exit {want}", status == want, (status, err[-800:]))
    check(f"{name}: says it was interrupted", "interrupted" in err, err[-800:])


with tempfile.TemporaryDirectory() as tmp:
    # ---------------------------------------------------------------- simulate
    for sig, want in SIGNALS:
        name = f"simulate {sig.name}"
        d = os.path.join(tmp, f"sim_{sig.name}")
        os.mkdir(d)
        out = os.path.join(d, "run.h5")
        _, status, err = interrupt(name, ["simulate", DEMO, "-o", out, "--set", "simulation.duration=60",
                                          "--set", "simulation.max_step=1e-5",
                                          "--set", "simulation.stepper=dopri5"], sig,  # max_step slows adaptive steppers only
                                   ready=lambda: os.path.exists(out + ".part"))
        check(f"{name}: exit {want}", status == want, (status, err[-800:]))
        check(f"{name}: partial run kept", os.path.exists(os.path.join(d, "run.incomplete.h5")), os.listdir(d))
        check(f"{name}: no temporary file", not leftovers(d), leftovers(d))

    # ----------------------------------------------------------------- flutter
    # p-k over 20000 speeds: tens of seconds; the engine checks between speeds.
    for sig, want in SIGNALS:
        name = f"flutter {sig.name}"
        d = os.path.join(tmp, f"flutter_{sig.name}")
        os.mkdir(d)
        out = os.path.join(d, "flutter.h5")
        r = subprocess.run([BIN, "flutter", DEMO, "-o", out, "--speeds", "5:150:20", "--method", "state-space"],
                           capture_output=True, text=True)
        check(f"{name}: earlier complete result", r.returncode == 0, r.stderr)
        before = digest(out)
        _, status, err = interrupt(name, ["flutter", DEMO, "-o", out, "--speeds", "5:150:20000"], sig)
        expect_status(name, status, want, err)
        check(f"{name}: earlier result untouched", digest(out) == before)
        check(f"{name}: no temporary file", not leftovers(d), leftovers(d))
        check(f"{name}: nothing else written", os.listdir(d) == ["flutter.h5"], os.listdir(d))

    # -------------------------------------------------------------------- gust
    for sig, want in SIGNALS:
        name = f"gust {sig.name}"
        d = os.path.join(tmp, f"gust_{sig.name}")
        os.mkdir(d)
        out = os.path.join(d, "gust.h5")
        with open(out, "wb") as f:
            f.write(b"an earlier result")
        _, status, err = interrupt(name, ["gust", DEMO, "-o", out, "--gradients", "9.144:106.68:400",
                                          "--set", "simulation.max_step=1e-4",
                                          "--set", "simulation.stepper=dopri5"], sig)
        expect_status(name, status, want, err)
        check(f"{name}: earlier result untouched", open(out, "rb").read() == b"an earlier result")
        check(f"{name}: no temporary file", not leftovers(d), leftovers(d))

    # ------------------------------------------------------------------- sweep
    sweep_args = ["sweep", DEMO, "--vary", "flow.airspeed=20:60:10", "--jobs", "2",
                  "--set", "simulation.duration=5", "--set", "simulation.max_step=1e-5",
                  "--set", "simulation.stepper=dopri5"]  # max_step slows adaptive steppers only
    for sig, want in SIGNALS:
        name = f"sweep {sig.name}"
        d = os.path.join(tmp, f"sweep_{sig.name}")
        os.mkdir(d)
        out = os.path.join(d, "map.h5")
        journal = out + ".journal"

        def points():
            try:
                with open(journal, "rb") as f:
                    return f.read().count(b"\n") - 1
            except OSError:
                return 0

        _, status, err = interrupt(name, [*sweep_args, "-o", out], sig, ready=lambda: points() >= 2, settle=0)
        expect_status(name, status, want, err)
        check(f"{name}: no map written", not os.path.exists(out))
        check(f"{name}: no temporary file", not leftovers(d), leftovers(d))
        with open(journal, "rb") as f:
            data = f.read()
        lines = data.split(b"\n")
        check(f"{name}: journal ends with a complete line", data.endswith(b"\n"))
        head = json.loads(lines[0])
        check(f"{name}: journal head names its kind and format",
              head.get("aerosect_journal") == "sweep" and head.get("format") == 4, lines[0][:200])
        kept = len(lines) - 2
        check(f"{name}: finished points kept", kept >= 2 and f"{kept} finished points kept" in err, (kept, err))

    # ------------------------------------------------------------------- merge
    # Two shards of a small sweep; merging computes the flutter overlay of the
    # map (airspeed swept), which is the long part: the trimmed demo (the
    # dual-input describing function solves its mean equation at every
    # amplitude and speed) with eight Wagner lag states, about 1 s here. (The
    # plain demo's overlay takes under 0.1 s since the rank-one scan.)
    shards_dir = os.path.join(tmp, "shards")
    os.mkdir(shards_dir)
    shards = []
    slow_overlay = ["--set", 'aerodynamics.wagner="custom"',
                    "--set", "aerodynamics.wagner_coefficients=[0.04,0.04,0.04,0.04,0.04,0.1,0.1,0.1]",
                    "--set", "aerodynamics.wagner_exponents=[0.01,0.02,0.05,0.1,0.2,0.3,0.5,1.0]"]
    for k in (1, 2):
        s = os.path.join(shards_dir, f"part{k}.h5")
        r = subprocess.run([BIN, "sweep", TRIMMED, "--vary", "flow.airspeed=20:60:3", "--jobs", "1",
                            "--shard", f"{k}/2", "-o", s, "--set", "simulation.duration=0.5", *slow_overlay],
                           capture_output=True, text=True)
        check(f"merge: shard {k} written", r.returncode == 0, r.stderr)
        shards.append(s)
    for sig, want in SIGNALS:
        name = f"merge {sig.name}"
        d = os.path.join(tmp, f"merge_{sig.name}")
        os.mkdir(d)
        out = os.path.join(d, "map.h5")
        with open(out, "wb") as f:
            f.write(b"an earlier result")
        _, status, err = interrupt(name, ["merge", *shards, "-o", out], sig, settle=0.2)
        expect_status(name, status, want, err)
        check(f"{name}: earlier result untouched", open(out, "rb").read() == b"an earlier result")
        check(f"{name}: no temporary file", not leftovers(d), leftovers(d))
        check(f"{name}: shards untouched", all(os.path.exists(s) for s in shards))

    # ------------------------------------------------------------------- study
    # An engine stage (the LCO sweep), then the figures stage with a plotting
    # tool that writes half a figure and waits.
    study_args = ["--jobs", "2", "--sweep-points", "6", "--set", "simulation.max_step=1e-4",
                  "--set", "simulation.stepper=dopri5"]  # max_step slows adaptive steppers only
    for sig, want in SIGNALS:
        name = f"study (LCO sweep) {sig.name}"
        d = os.path.join(tmp, f"study_{sig.name}")
        _, status, err = interrupt(name, ["study", DEMO, "-o", d, *study_args], sig,
                                   ready=lambda: os.path.exists(os.path.join(d, "flutter.h5")), settle=0.5)
        expect_status(name, status, want, err)
        check(f"{name}: no temporary file", not leftovers(d), leftovers(d))
        check(f"{name}: finished files kept", all(os.path.exists(os.path.join(d, n))
                                                  for n in ("case.toml", "check.json", "flutter.h5")), os.listdir(d))
        check(f"{name}: no report", not os.path.exists(os.path.join(d, "report.html")))
        with open(os.path.join(d, "summary.json")) as f:
            summary = json.load(f)
        check(f"{name}: summary says not completed", summary.get("completed") is False, summary.get("completed"))
        check(f"{name}: summary lists only files that exist",
              all(os.path.exists(os.path.join(d, n)) for n in summary.get("hdf5_files", [])), summary.get("hdf5_files"))

    tool = os.path.join(tmp, "slow_plot")
    marker = os.path.join(tmp, "plot_started")
    with open(tool, "w") as f:
        f.write("#!/bin/sh\n# aerosect's plotting tool stand-in: half a figure, then a long wait.\n"
                f"printf 'half a png' > \"$3/half.png\"\ntouch '{marker}'\nexec sleep 120\n")
    os.chmod(tool, os.stat(tool).st_mode | stat.S_IXUSR)
    env = dict(os.environ, AEROSECT_PLOT=tool)
    for sig, want in SIGNALS:
        name = f"study (figures) {sig.name}"
        d = os.path.join(tmp, f"study_fig_{sig.name}")
        if os.path.exists(marker):
            os.remove(marker)
        # Signalled while the plotting tool runs: only aerosect gets the signal
        # (as from `kill`), so aerosect must stop its child itself.
        _, status, err = interrupt(name, ["study", DEMO, "-o", d, "--sweep-points", "4", "--jobs", "2",
                                          "--set", "simulation.duration=2"], sig,
                                   ready=lambda: os.path.exists(marker), settle=0.2, env=env)
        expect_status(name, status, want, err)
        check(f"{name}: no temporary file or staging directory", not leftovers(d), leftovers(d))
        check(f"{name}: no half-written figure", not os.path.exists(os.path.join(d, "half.png")), os.listdir(d))
        check(f"{name}: no report", not os.path.exists(os.path.join(d, "report.html")))
        check(f"{name}: HDF5 files kept", os.path.exists(os.path.join(d, "flutter.h5")), os.listdir(d))

print(f"{passed} passed, {failed} failed")
sys.exit(1 if failed else 0)

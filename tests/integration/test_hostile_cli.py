#!/usr/bin/python3
"""Hostile command-line values, per command: every option value outside its
documented range (README "Limits") is refused before any work with exit 2,
a message headed "error in the command line" that names the option (or the
case key of a --set) and says what is allowed; no crash, no hang, and no
file made or changed (no output, no .part, no journal, no study folder).

The corpus is the table CORPUS below: (command, extra arguments, the name
the message must hold). The case file's digest is compared after every run
(a run must never write over its input). The closing line counts the inputs
tried, crashes, hangs and damaged files per command.

Source of the expectations: the program's own documented contract (README
"Limits", "Exit status and interruption"); no outside value is checked here
(common practice, no source).
"""
import os
import re
import subprocess
import sys
import tempfile
from files import digest

BIN, SRC = os.path.abspath(sys.argv[1]), os.path.abspath(sys.argv[2])
DEMO = os.path.join(SRC, "cases", "demo_aileron.toml")
CRASH_SIGNS = ("terminate called", "Sanitizer", "runtime error:", "internal error", "Segmentation",
               "core dumped", "Aborted", "std::", "what():")
TIMEOUT = 120  # s; a refusal takes well under a second, so this only catches hangs

LONG = "x" * 300 + ".h5"          # one name longer than NAME_MAX (255)
DEEP = "/".join(["d" * 150] * 30)  # 4500 bytes, longer than the documented 4000

# (command, arguments after the case / before -o, option named in the message)
# "{out}" is replaced by a fresh output path in the run's folder, "{case}" by
# the case file.
CORPUS = []


def add(command, *cases):
    for args, name in cases:
        CORPUS.append((command, args, name))


for cmd in ("simulate", "flutter", "gust", "sweep", "study", "orbits"):
    vary = ["--vary", "flow.airspeed=20:40:3"] if cmd == "sweep" else []
    add(cmd,
        (["{case}", *vary, "-o", ""], "-o"),
        (["{case}", *vary, "-o", "{dir}/" + LONG], "-o"),
        (["{case}", *vary, "-o", "{dir}/" + DEEP], "-o"),
        (["{case}", *vary, "-o", "{out}", "--set", "flow.airspeed=nan"], "flow.airspeed"),
        (["{case}", *vary, "-o", "{out}", "--set", "flow.airspeed=inf"], "flow.airspeed"),
        (["{case}", *vary, "-o", "{out}", "--set", "section." + "q" * 30000 + "=1"], "section.qqqq"))
add("check",
    (["{case}", "--set", "flow.airspeed=-inf"], "flow.airspeed"),
    (["{case}", "--set", "x" * 30000 + "=1"], "xxxx"))

add("simulate",
    (["{case}", "-o", "{out}", "--set", "simulation.max_step=1e-300"], "simulation.max_step"),
    (["{case}", "-o", "{out}", "--set", "simulation.absolute_tolerance=1e-300"],
     "simulation.absolute_tolerance"),
    (["{case}", "-o", "{out}", "--set", "simulation.relative_tolerance=1e-300"],
     "simulation.relative_tolerance"),
    (["{case}", "-o", "{out}", "--set", "simulation.initial_step=1e-300"], "simulation.initial_step"))

add("flutter",
    (["{case}", "--speeds", "10:1e300:3"], "--speeds"),
    (["{case}", "--speeds", "10:1000:3"], "--speeds"),
    (["{case}", "--speeds", "0:0:5"], "--speeds"),
    (["{case}", "--speeds", "50:10:5"], "--speeds"),
    (["{case}", "--speeds", "-5:20:5"], "--speeds"),
    (["{case}", "--speeds", "10:20:1"], "--speeds"),
    (["{case}", "--speeds", "10:20:100001"], "--speeds"),
    (["{case}", "--speeds", "10:20:99999999999999999999"], "--speeds"),
    (["{case}", "--speeds", "nan:20:5"], "--speeds"),
    (["{case}", "--speeds", "10:inf:5"], "--speeds"),
    (["{case}", "--speeds", "10:10.000000000001:10000"], "--speeds"),
    (["{case}", "--speeds", "10:20"], "--speeds"),
    (["{case}", "--amplitude", "0"], "--amplitude"),
    (["{case}", "--amplitude", "-1"], "--amplitude"),
    (["{case}", "--amplitude", "nan"], "--amplitude"),
    (["{case}", "--amplitude", "inf"], "--amplitude"),
    (["{case}", "--amplitude", "1e300"], "--amplitude"),
    (["{case}", "--amplitude", "abc"], "--amplitude"),
    (["{case}", "--method", "both\x1b[31m"], "--method"))

add("gust",
    (["{case}", "--gradients", "10:1e12:2"], "--gradients"),
    (["{case}", "--gradients", "10:1001:2"], "--gradients"),
    (["{case}", "--gradients", "0:10:2"], "--gradients"),
    (["{case}", "--gradients", "1e-300:1:2"], "--gradients"),
    (["{case}", "--gradients", "10:5:3"], "--gradients"),
    (["{case}", "--gradients", "10:20:0"], "--gradients"),
    (["{case}", "--gradients", "10:20:10001"], "--gradients"),
    (["{case}", "--gradients", "10:10:5"], "--gradients"),
    (["{case}", "--gradients", "10:20:1"], "--gradients"),
    (["{case}", "--gradients", "nan:20:3"], "--gradients"),
    (["{case}", "--gradients", "10:1e400:3"], "--gradients"))

add("sweep",
    (["{case}", "--vary", "flow.airspeed=20:40:3", "-o", "{out}", "--jobs", "0"], "--jobs"),
    (["{case}", "--vary", "flow.airspeed=20:40:3", "-o", "{out}", "--jobs", "-1"], "--jobs"),
    (["{case}", "--vary", "flow.airspeed=20:40:3", "-o", "{out}", "--jobs", "100000"], "--jobs"),
    (["{case}", "--vary", "flow.airspeed=20:40:3", "-o", "{out}", "--jobs", "99999999999"], "--jobs"),
    (["{case}", "--vary", "flow.airspeed=20:40:3", "--vary", "flow.airspeed=30:50:3", "-o", "{out}"], "--vary"),
    (["{case}", "--vary", "flow.airspeed=20:40:2000000", "-o", "{out}"], "--vary"),
    (["{case}", "--vary", "flow.airspeed=20:40:1000", "--vary", "flow.altitude=0:1000:1000", "-o", "{out}"],
     "--vary"),
    (["{case}", "--vary", "flow.airspeed=nan:40:3", "-o", "{out}"], "--vary"),
    (["{case}", "--vary", "flow.airspeed=20:20:3", "-o", "{out}"], "--vary"),
    (["{case}", "--vary", "flow.airspeed=20:20.00000000000001:1000", "-o", "{out}"], "--vary"),
    (["{case}", "--vary", "=20:40:3", "-o", "{out}"], "--vary"),
    (["{case}", "--vary", "flow.airspeed=20:1e300:3", "-o", "{out}"], "flow.airspeed"),
    (["{case}", "--vary", "flow.airspeed=20:40:3", "-o", "{out}", "--shard", "0/2"], "--shard"),
    (["{case}", "--vary", "flow.airspeed=20:40:3", "-o", "{out}", "--shard", "3/2"], "--shard"),
    (["{case}", "--vary", "flow.airspeed=20:40:3", "-o", "{out}", "--shard", "1/0"], "--shard"))

add("study",
    (["{case}", "-o", "{out}", "--jobs", "0"], "--jobs"),
    (["{case}", "-o", "{out}", "--jobs", "-1"], "--jobs"),
    (["{case}", "-o", "{out}", "--jobs", "100000"], "--jobs"),
    (["{case}", "-o", "{out}", "--sweep-points", "0"], "--sweep-points"),
    (["{case}", "-o", "{out}", "--sweep-points", "1"], "--sweep-points"),
    (["{case}", "-o", "{out}", "--sweep-points", "-5"], "--sweep-points"),
    (["{case}", "-o", "{out}", "--sweep-points", "2000000000"], "--sweep-points"),
    (["{case}", "-o", "{out}", "--sweep-speeds", "10:1e300:3"], "--sweep-speeds"),
    (["{case}", "-o", "{out}", "--sweep-speeds", "0:50:5"], "--sweep-speeds"),
    (["{case}", "-o", "{out}", "--sweep-speeds", "10:50:200000"], "--sweep-speeds"))

add("orbits",
    (["{case}", "-o", "{out}", "--points", "0"], "--points"),
    (["{case}", "-o", "{out}", "--points", "2000000000"], "--points"),
    (["{case}", "-o", "{out}", "--from", "nan"], "--from"),
    (["{case}", "-o", "{out}", "--to", "inf"], "--to"),
    (["{case}", "-o", "{out}", "--start-amplitude", "0"], "--start-amplitude"),
    (["{case}", "-o", "{out}", "--start-amplitude", "inf"], "--start-amplitude"))

add("merge",
    (["{dir}/no_such_shard.h5", "-o", ""], "-o"),
    (["{dir}/no_such_shard.h5", "-o", "{dir}/" + LONG], "-o"))

counts = {}  # command -> [tried, crashes, hangs, damaged]
passed = failed = 0


def check(name, cond, detail=""):
    global passed, failed
    if cond:
        passed += 1
    else:
        failed += 1
        print(f"FAIL {name}: {detail}")


def snapshot(folder):
    return {os.path.join(d, n) for d, _, files in os.walk(folder) for n in files} | \
           {d for d, _, _ in os.walk(folder)}


with tempfile.TemporaryDirectory() as tmp:
    case = os.path.join(tmp, "case.toml")
    with open(case, "w") as f:
        f.write(open(DEMO).read())
    before_case = digest(case)
    for k, (cmd, args, name) in enumerate(CORPUS):
        run_dir = os.path.join(tmp, f"run{k}")
        os.mkdir(run_dir)
        out = os.path.join(run_dir, "out" if cmd == "study" else "out.h5")
        argv = [BIN, cmd] + [a.replace("{case}", case).replace("{out}", out).replace("{dir}", run_dir)
                             for a in args]
        if cmd in ("flutter", "gust") and "-o" not in args:
            argv += ["-o", out]
        label = f"{cmd} {' '.join(a if len(a) < 50 else a[:40] + '...' for a in args)}"
        c = counts.setdefault(cmd, [0, 0, 0, 0])
        c[0] += 1
        before = snapshot(run_dir)
        try:
            r = subprocess.run(argv, capture_output=True, timeout=TIMEOUT, cwd=run_dir)
        except subprocess.TimeoutExpired:
            c[2] += 1
            check(f"{label}: answers", False, f"no answer within {TIMEOUT} s")
            continue
        err = r.stderr.decode("utf-8", "replace")
        flat = re.sub(r"\n {4}", " ", err)
        crashed = r.returncode < 0 or r.returncode > 128 or any(s in err for s in CRASH_SIGNS)
        c[1] += crashed
        check(f"{label}: no crash", not crashed, f"exit {r.returncode}: {err[:600]}")
        check(f"{label}: exit 2", r.returncode == 2, f"exit {r.returncode}: {err[:600]}")
        check(f"{label}: headed as a command-line error", "error in the command line" in err, err[:600])
        check(f"{label}: names {name[:20]}", name in flat, err[:600])
        check(f"{label}: says what is allowed", "allowed" in err or "--help" in err, err[:600])
        check(f"{label}: no raw control bytes", "\x1b" not in err and "\x00" not in err, repr(err[:200]))
        made = snapshot(run_dir) - before
        damaged = bool(made) or digest(case) != before_case
        c[3] += damaged
        check(f"{label}: no file made or changed", not damaged, sorted(made)[:5])

total = [sum(c[i] for c in counts.values()) for i in range(4)]
for cmd, (n, crashes, hangs, damaged) in sorted(counts.items()):
    print(f"{cmd:9} {n:3} inputs tried, {crashes} crashes, {hangs} hangs, {damaged} files made or damaged")
print(f"all       {total[0]:3} inputs tried, {total[1]} crashes, {total[2]} hangs, {total[3]} files made or damaged")
print(f"{passed} passed, {failed} failed")
sys.exit(1 if failed else 0)

#!/usr/bin/python3
"""A study folder holds one study, whatever interrupts a new study run over
an earlier one (study_folder.hpp):

- a complete study A is in DIR; a study B with another case is run into DIR
  and stopped by SIGINT at each of its stages in turn (the progress line of
  the stage on stderr); after each stop DIR holds B's files only (case.toml
  is B's, summary.json says "completed": false and lists every HDF5 file at
  the top, no report.html) and DIR/previous_study holds A whole, byte for
  byte; a stop that comes after B's last stage leaves B complete instead;
- B run to the end: DIR is B complete and previous_study is gone;
- kill -9 in the middle of a study over B: A's copy was dropped, B is whole
  in previous_study;
- a study over an interrupted one: the interrupted one's files are removed,
  nothing complete is lost.
The closing line counts the interruptions tried and the mixed folders found.

Source of the expectations: the program's own documented contract (README
"Exit status and interruption"); no outside value is checked here
(common practice, no source).
"""
import glob
import hashlib
import json
import os
import shutil
import signal
import subprocess
import sys
import tempfile

BIN, SRC = os.path.abspath(sys.argv[1]), os.path.abspath(sys.argv[2])
DEMO = os.path.join(SRC, "cases", "demo_aileron.toml")
QUICK = ["--no-plots", "--jobs", "2", "--sweep-points", "4", "--set", "simulation.duration=2"]
A_MARK, B_MARK = "simulation.max_step=0.002", "simulation.max_step=0.001"
STAGES = ["check", "flutter", "LCO sweep", "LCO branch", "LCO time history", "design gust", "response"]
passed = failed = 0
tried = mixed = 0


def check(name, cond, detail=""):
    global passed, failed
    if cond:
        passed += 1
    else:
        failed += 1
        print(f"FAIL {name}: {detail}")


def digests(folder):
    out = {}
    for p in glob.glob(os.path.join(folder, "*")):
        if os.path.isfile(p) and not p.endswith(".lock"):
            with open(p, "rb") as f:
                out[os.path.basename(p)] = hashlib.sha256(f.read()).hexdigest()
    return out


def study(d, mark, stop_at=None, sig=signal.SIGINT):
    """Runs a study into d; with stop_at, sends `sig` when that stage starts."""
    p = subprocess.Popen([BIN, "study", DEMO, "-o", d, *QUICK, "--set", mark],
                         stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    err = []
    sent = False
    for line in p.stderr:
        err.append(line)
        if stop_at and not sent and "]: " + stop_at in line:
            p.send_signal(sig)
            sent = True
    p.wait(timeout=600)
    p.stdout.read()
    return p.returncode, "".join(err), sent


def consistent(label, d, mark, earlier):
    """d is either the new study complete, or the new study's files beside the earlier one kept whole."""
    global mixed
    top = digests(d)
    prev = os.path.join(d, "previous_study")
    case_toml = open(os.path.join(d, "case.toml")).read() if "case.toml" in top else ""
    summary = json.load(open(os.path.join(d, "summary.json"))) if "summary.json" in top else {}
    ok = True
    if "report.html" in top:
        ok &= summary.get("completed") is True and not os.path.exists(prev)
        check(f"{label}: complete, no earlier study left", ok, (summary.get("completed"), os.path.exists(prev)))
    else:
        listed = set(summary.get("hdf5_files", []))
        # NAME.incomplete.h5: the stage stopped in its run kept its part (the new run's).
        h5 = {n for n in top if n.endswith(".h5") and not n.endswith(".incomplete.h5")}
        good = summary.get("completed") is False and h5 <= listed and all(n in top for n in listed)
        check(f"{label}: summary says not completed and lists every HDF5 file", good, (summary.get("completed"),
                                                                                       h5, listed))
        kept = digests(prev) == earlier if earlier is not None else not os.path.exists(prev)
        check(f"{label}: the earlier complete study kept whole", kept, sorted(digests(prev)) if kept is False else "")
        ok &= good and kept
    mine = mark in case_toml
    check(f"{label}: case.toml is this run's", mine, case_toml[-300:])
    ok &= mine
    mixed += not ok


with tempfile.TemporaryDirectory() as tmp:
    d = os.path.join(tmp, "study")
    status, err, _ = study(d, A_MARK)
    check("study A completes", status == 0, err[-800:])
    a_files = digests(d)
    check("study A wrote its report", "report.html" in a_files, sorted(a_files))

    pristine = os.path.join(tmp, "pristine_a")
    shutil.copytree(d, pristine)
    for stage in STAGES:
        # Each stop starts from the complete study A.
        shutil.rmtree(d)
        shutil.copytree(pristine, d)
        status, err, sent = study(d, B_MARK, stop_at=stage)
        if not sent:
            print(f"SKIP SIGINT at {stage}: the stage does not run for this case")
            continue
        tried += 1
        check(f"SIGINT at {stage}: exit 130 (or 0 after the last stage)", status in (130, 0), (status, err[-500:]))
        check(f"SIGINT at {stage}: says where A is kept", "previous_study" in err, err[-500:])
        consistent(f"SIGINT at {stage}", d, B_MARK, a_files if status == 130 else None)

    # B complete: previous_study goes.
    status, err, _ = study(d, B_MARK)
    check("study B completes", status == 0, err[-800:])
    consistent("B complete", d, B_MARK, None)
    b_files = digests(d)

    # kill -9 during the LCO sweep of A over B: B is whole in previous_study.
    status, err, sent = study(d, A_MARK, stop_at="LCO sweep", sig=signal.SIGKILL)
    tried += 1
    check("kill -9: killed", status == -9, status)
    kept = digests(os.path.join(d, "previous_study")) == b_files
    check("kill -9: B kept whole in previous_study", kept)
    top_case = open(os.path.join(d, "case.toml")).read()
    check("kill -9: the top is the new run's", A_MARK in top_case and not os.path.exists(
        os.path.join(d, "report.html")))
    mixed += not kept

    # A study over the interrupted one: its files are replaced; B stays kept
    # until the new one completes.
    status, err, sent = study(d, A_MARK, stop_at="flutter")
    tried += 1
    check("over an interrupted study: exit 130", status == 130, (status, err[-500:]))
    consistent("over an interrupted study", d, A_MARK, b_files)
    status, err, _ = study(d, A_MARK)
    check("A again completes", status == 0, err[-800:])
    consistent("A again complete", d, A_MARK, None)

print(f"{tried} interruptions tried, {mixed} mixed folders")
print(f"{passed} passed, {failed} failed")
sys.exit(1 if failed else 0)

#!/usr/bin/python3
"""Hostile sweep journals and shard files through the program.

Common practice, no source: every number, size and index read from a file is
checked against what was written before use (issue #13's rule); a file never
decides how much memory is allocated or how far an array is read. Each
tampered journal or shard here must give exit 2 with a message naming the
file (and the journal line), never a crash (negative status), exit 1 or a
map written from it.
"""
import json
import os
import shutil
import subprocess
import sys
import tempfile

import h5py
import numpy as np

BIN, SRC = sys.argv[1], sys.argv[2]
DEMO = os.path.join(SRC, "cases", "demo_aileron.toml")
SWEEP = ["--vary", "flow.airspeed=20:60:5", "--set", "simulation.duration=1.0", "--jobs", "1"]
passed = failed = 0


def check(name, cond, detail=""):
    global passed, failed
    if cond:
        passed += 1
    else:
        failed += 1
        print(f"FAIL {name}: {str(detail)[-600:]}")


def run(*args):
    return subprocess.run([BIN, *args], capture_output=True, text=True, timeout=300)


def refused(name, r, path, *words):
    """Exit 2, the file named (journal lines as PATH:LINE:), no crash, no
    internal-error wording."""
    check(f"{name}: exit 2", r.returncode == 2, f"status {r.returncode}: {r.stderr}")
    check(f"{name}: names {os.path.basename(path)}", path in r.stderr, r.stderr)
    for w in words:
        check(f"{name}: says '{w}'", w in r.stderr, r.stderr)
    check(f"{name}: headed as an input-file error (not as the case's)",
          "error in an input file" in r.stderr and "error in the case" not in r.stderr, r.stderr[:300])
    check(f"{name}: no internal error", "internal" not in r.stderr.lower()
          and "terminate" not in r.stderr, r.stderr)


def record_from_map(f, d, i):
    """A journal record (format 4) of the point (direction d, i) built from
    the map's own tables: the fields by their dataset names."""
    axis = f["response_class"].dims[1][0]  # the swept axis, named after its key
    rec = {"direction": d, "i": i, "j": 0, "value1": float(axis[i]), "value2": 0.0,
           "error": "", "refinement_failure": "", "watched_dof": 1,
           "stopped_early": False, "steps": 10}
    for name, obj in f.items():
        if not isinstance(obj, h5py.Dataset) or obj.ndim < 2 or name.startswith("lco_prediction"):
            continue
        v = np.asarray(obj[()], dtype=float)[d, i]
        if name.endswith(("_mean", "_rms", "_rms_about_mean", "_thd", "_harmonics", "_cycle")):
            continue  # the settled cycle's fields: periodic points only
        rec[name] = None if np.isnan(v) else float(v)
    rec["final_state"] = []
    rec["final_regions"] = []
    return rec


with tempfile.TemporaryDirectory() as tmp:
    # --- journals -----------------------------------------------------------
    mp = os.path.join(tmp, "map.h5")
    r = run("sweep", DEMO, *SWEEP, "-o", mp)
    check("reference sweep", r.returncode == 0, r.stderr)
    with h5py.File(mp) as f:
        request = json.loads(f.attrs["sweep_request"])
        good = record_from_map(f, 0, 0)
        n1 = f["response_class"].dims[1][0].shape[0]
        nh = f["harmonic"].shape[0]
    head = {"aerosect_journal": "sweep", "format": 4, "identity": request}
    journal = mp + ".journal"

    def with_journal(*records, raw=None):
        with open(journal, "w") as out:
            out.write(json.dumps(head) + "\n")
            for rec in records:
                out.write((rec if isinstance(rec, str) else json.dumps(rec)) + "\n")
        return run("sweep", DEMO, *SWEEP, "-o", mp)

    # A journal built from the map's tables resumes (the record form works).
    r = with_journal(good)
    check("journal of the map's own point resumes", r.returncode == 0 and "resuming: 1 finished" in r.stderr,
          r.stderr)
    check("resumed run removes its journal", not os.path.exists(journal))

    cycle = {f"{dof}_{k}": 0.0 for dof in ("plunge", "pitch", "flap")
             for k in ("mean", "rms", "rms_about_mean", "thd")}
    for dof in ("plunge", "pitch", "flap"):
        cycle[f"{dof}_harmonics"] = [0.0] * nh
    cycle["cycle_period"] = 0.5
    hostile = {
        "out-of-range DOF index": (dict(good, watched_dof=7), "watched_dof"),
        "negative DOF index": (dict(good, watched_dof=-1), "watched_dof"),
        "empty harmonics array": (dict(good, **dict(cycle, pitch_harmonics=[])), "pitch_harmonics"),
        "harmonics array too long": (dict(good, **dict(cycle, pitch_harmonics=[0.0] * (nh + 1))), "pitch_harmonics"),
        "index past the axis": (dict(good, i=n1), "i"),
        "value not the axis value at its index": (dict(good, value1=good["value1"] + 1.0), "value1"),
        "huge index": (dict(good, i=2**62), "i"),
        "unknown class": (dict(good, response_class=99), "response_class"),
        "fractional class": (dict(good, response_class=1.5), "response_class"),
        "unknown decay reason": (dict(good, decay_reason=3), "decay_reason"),
        "missing table field": ({k: v for k, v in good.items() if k != "frequency"}, "frequency"),
        "text where a number is": (dict(good, frequency="fast"), "frequency"),
        "state longer than any model": (dict(good, final_state=[0.0] * 5000), "final_state"),
        "spring region out of range": (dict(good, final_regions=[99999999, 0]), "final_regions"),
        "empty object": ({}, "direction"),
    }
    for name, (rec, key) in hostile.items():
        r = with_journal(rec)
        refused(f"journal, {name}", r, journal, journal + ":2:", key)
        check(f"journal, {name}: journal kept", os.path.exists(journal))
    r = with_journal("[1, 2]")
    refused("journal, a list for a record", r, journal, journal + ":2:")
    r = with_journal(good, dict(good))
    refused("journal, a point twice", r, journal, journal + ":3:", "second time")
    # An older journal format is refused with the format named.
    for old in (2, 3):
        head["format"] = old
        r = with_journal(good)
        refused(f"journal of format {old}", r, journal, "format")
    head["format"] = 4
    # A journal larger than its cap (32 GiB, README "Limits") is refused
    # before any of it is read, with its size and the cap, and kept: a sparse
    # file (truncate), so the check stays fast.
    cap = 32 << 30
    with open(journal, "w") as out:
        out.write(json.dumps(head) + "\n")
    os.truncate(journal, cap + 1)
    r = run("sweep", DEMO, *SWEEP, "-o", mp)
    refused("journal beyond the cap", r, journal, str(cap + 1), str(cap))
    check("journal beyond the cap: journal kept", os.path.getsize(journal) == cap + 1)
    os.remove(journal)

    # --- shards ---------------------------------------------------------------
    parts = []
    for k in (1, 2):
        part = os.path.join(tmp, f"part{k}.h5")
        r = run("sweep", DEMO, *SWEEP, "-o", part, "--shard", f"{k}/2")
        check(f"shard {k}", r.returncode == 0, r.stderr)
        parts.append(part)
    merged = os.path.join(tmp, "merged.h5")
    r = run("merge", *parts, "-o", merged)
    check("merge of intact shards", r.returncode == 0, r.stderr)

    def tampered(name, change):
        bad = os.path.join(tmp, f"bad_{name.replace(' ', '_')}.h5")
        shutil.copyfile(parts[0], bad)
        with h5py.File(bad, "r+") as f:
            change(f)
        out = os.path.join(tmp, "out.h5")
        r = run("merge", bad, parts[1], "-o", out)
        check(f"shard, {name}: no map written", not os.path.exists(out))
        return r, bad

    def edit_request(change):
        def apply(f):
            req = json.loads(f.attrs["sweep_request"])
            change(req)
            f.attrs["sweep_request"] = json.dumps(req)
        return apply

    def more_values(req):  # the request declares more axis values than the tables hold
        req["axes"][0][1] = req["axes"][0][1] + [70.0, 80.0]

    def replace(name, data):
        def apply(f):
            attrs = dict(f[name].attrs)
            del f[name]
            f[name] = data
            for key in ("units", "long_name"):
                if key in attrs:
                    f[name].attrs[key] = attrs[key]
        return apply

    def set_cell(name, value):
        def apply(f):
            v = f[name][()]
            v[0, 0] = value
            f[name][...] = v
        return apply

    cases = {
        "more axis values than the tables hold": (edit_request(more_values), "response_class"),
        "harmonics tables of the wrong length": (replace("pitch_harmonics", np.zeros((2, n1, 1))),
                                                  "pitch_harmonics"),
        "empty harmonics table": (replace("pitch_harmonics", np.zeros((0,))), "pitch_harmonics"),
        "unknown class": (set_cell("response_class", 99.0), "response_class"),
        "watched DOF it does not have": (lambda f: f.attrs.__setitem__("watched_dof", "tail"), "watched_dof"),
        "missing table": (lambda f: f.__delitem__("frequency"), "frequency"),
        "shard 3 of 2": (edit_request(lambda q: q.__setitem__("shard", [3, 2])), "shard"),
        "no axes": (edit_request(lambda q: q.__setitem__("axes", [])), "axes"),
        "2^31 cycle samples": (edit_request(lambda q: q.__setitem__("cycle_samples", 2**31)), "cycle_samples"),
        "zero harmonics": (edit_request(lambda q: q.__setitem__("harmonics", 0)), "harmonics"),
        "axes of the wrong type": (edit_request(lambda q: q.__setitem__("axes", "none")), "sweep request"),
        "request not an object": (lambda f: f.attrs.__setitem__("sweep_request", "[1, 2]"), "not an aerosect sweep"),
    }
    for name, (change, word) in cases.items():
        r, bad = tampered(name, change)
        refused(f"shard, {name}", r, bad, word)

print(f"{passed} passed, {failed} failed")
sys.exit(1 if failed else 0)

#!/usr/bin/python3
"""`aerosect orbits --shard K/N` and `aerosect merge` of its files (issue #17
scope 3: shards by independent unit, a branch for continuation).

    test_orbits_shards.py AEROSECT SOURCE_DIR

The unit is a branch; orbits traces one per run, in shard 1/N. Checks:
  - the merge of 3 shards equals the unsharded file dataset by dataset and
    attribute by attribute (values, types and shapes; h5py), and so does
    the merge of the single shard 1/1;
  - an empty shard (2/3, 3/3) is a valid branch file: h5py, netCDF4-python,
    xarray and ncdump open it; points = 0, complete = 0 and stop_reason says
    it holds no branch;
  - the merge refuses a missing shard, a shard given twice, a shard of
    another run (other --points) and a shard of another series (N = 2 with
    N = 3): exit 2 naming the file, nothing written.
Common practice, no source: a sharded run merged must equal the unsharded
run (as the sweep's shards, tests/integration/test_cli.py).
"""

import os
import subprocess
import sys
import tempfile
import warnings

import h5py
import numpy as np

warnings.filterwarnings("ignore", message="numpy.ndarray size changed")
import netCDF4  # noqa: E402
import xarray as xr  # noqa: E402

EXE, SRC = sys.argv[1:3]
CUBIC = os.path.join(SRC, "tests", "regression", "cases", "lpw_cubic.toml")
ARGS = ["--from", "5.5", "--to", "7.0", "--start", "hopf", "--start-amplitude", "0.2", "--points", "8"]
REFERENCES = {"DIMENSION_LIST", "REFERENCE_LIST"}  # object references: compared as the scales they name
failures = []


def check(what, ok, detail=""):
    print(("ok   " if ok else "FAIL ") + what + ("" if ok else f": {detail}"))
    if not ok:
        failures.append(what)


def run(*args):
    return subprocess.run([EXE, *args], capture_output=True, text=True)


def same(a, b):
    a, b = np.asarray(a), np.asarray(b)
    if a.dtype != b.dtype or a.shape != b.shape:
        return False
    return np.array_equal(a, b, equal_nan=a.dtype.kind == "f")


def contents(path):
    """{object path: (kind, data, {attribute: value})} of every object."""
    out = {}
    with h5py.File(path) as f:
        def attrs(o):
            return {k: o.attrs[k] for k in o.attrs if k not in REFERENCES}

        def scales(d):
            return [[s.name for s in d.dims[k].values()] for k in range(d.ndim)]

        out["/"] = ("group", None, attrs(f))

        def visit(name, o):
            if isinstance(o, h5py.Dataset):
                out["/" + name] = ("dataset", (o[()], o.dtype, scales(o)), attrs(o))
            else:
                out["/" + name] = ("group", None, attrs(o))
        f.visititems(visit)
    return out


def compare(what, a, b):
    ca, cb = contents(a), contents(b)
    check(f"{what}: same objects", sorted(ca) == sorted(cb), set(ca) ^ set(cb))
    for name in sorted(set(ca) & set(cb)):
        ka, da, aa = ca[name]
        kb, db, ab = cb[name]
        if ka == "dataset":
            ok = kb == "dataset" and same(da[0], db[0]) and da[1] == db[1] and da[2] == db[2]
            check(f"{what}: {name} data", ok)
        check(f"{what}: {name} attributes", sorted(aa) == sorted(ab) and all(same(aa[k], ab[k]) for k in aa),
              (sorted(aa), sorted(ab)))


with tempfile.TemporaryDirectory() as tmp:
    p = lambda n: os.path.join(tmp, n)  # noqa: E731
    r = run("orbits", CUBIC, *ARGS, "-o", p("whole.h5"))
    check("unsharded: exit 0", r.returncode == 0, r.stderr)
    with h5py.File(p("whole.h5")) as f:
        check("unsharded: a branch of points", int(f.attrs["points"]) > 1, f.attrs["points"])
    for k in (1, 2, 3):
        r = run("orbits", CUBIC, *ARGS, "--shard", f"{k}/3", "-o", p(f"part{k}.h5"))
        check(f"shard {k}/3: exit 0", r.returncode == 0, r.stderr)

    # Empty shards: valid files.
    for k in (2, 3):
        path = p(f"part{k}.h5")
        with h5py.File(path) as f:
            check(f"shard {k}/3: no points, complete 0",
                  int(f.attrs["points"]) == 0 and int(f.attrs["complete"]) == 0, dict(f.attrs))
            why = f.attrs["stop_reason"]
            check(f"shard {k}/3: stop_reason says why", f"shard {k}/3 holds no branch" in why, why)
        with netCDF4.Dataset(path) as nc:
            check(f"shard {k}/3: netCDF4 opens it", nc.getncattr("aerosect_file_kind") == "orbit_branch")
        with xr.open_dataset(path, engine="netcdf4") as ds:
            check(f"shard {k}/3: xarray opens it", ds.attrs["points"] == 0)
        d = subprocess.run(["ncdump", "-h", path], capture_output=True, text=True)
        check(f"shard {k}/3: ncdump reads it", d.returncode == 0, d.stderr)

    # The merge equals the unsharded run, in any input order.
    r = run("merge", p("part3.h5"), p("part1.h5"), p("part2.h5"), "-o", p("merged.h5"))
    check("merge of 3: exit 0", r.returncode == 0, r.stderr)
    if r.returncode == 0:
        compare("merge of 3 = unsharded", p("merged.h5"), p("whole.h5"))
    r = run("orbits", CUBIC, *ARGS, "--shard", "1/1", "-o", p("one.h5"))
    r2 = run("merge", p("one.h5"), "-o", p("merged_one.h5"))
    check("shard 1/1 and its merge: exit 0", r.returncode == 0 and r2.returncode == 0, r.stderr + r2.stderr)
    if r2.returncode == 0:
        compare("merge of 1/1 = unsharded", p("merged_one.h5"), p("whole.h5"))

    # Refusals: exit 2, the file named, nothing written.
    run("orbits", CUBIC, *ARGS[:-1], "7", "--shard", "2/3", "-o", p("other_run.h5"))
    run("orbits", CUBIC, *ARGS, "--shard", "2/2", "-o", p("other_series.h5"))
    for label, files, words in (
            ("a shard missing", ["part1.h5", "part3.h5"], ["2 of 3 shards given"]),
            ("a shard twice", ["part1.h5", "part2.h5", "part2.h5"], ["part2.h5", "given twice"]),
            ("another run", ["part1.h5", "other_run.h5", "part3.h5"], ["other_run.h5", "different orbits run"]),
            ("another series", ["part1.h5", "other_series.h5", "part3.h5"], ["other_series.h5", "the others are of 3"])):
        out = p("refused.h5")
        r = run("merge", *[p(f) for f in files], "-o", out)
        check(f"merge refuses {label}: exit 2", r.returncode == 2, (r.returncode, r.stderr))
        check(f"merge refuses {label}: says so", all(w in r.stderr for w in words), r.stderr)
        check(f"merge refuses {label}: nothing written", not os.path.exists(out))

print(f"{len(failures)} failures" if failures else "all passed")
sys.exit(1 if failures else 0)

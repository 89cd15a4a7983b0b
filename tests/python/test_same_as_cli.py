"""The Python API returns what the command line writes, bit for bit.

Every run of tests/regression/suite.toml (the shipped demo case and the
benchmark cases, with the regression suite's own options) is made twice:
by the program (`aerosect COMMAND CASE -o FILE ARGS`) and through the
package (aerosect.COMMAND with the same options as keyword arguments).
The two HDF5 files must hold the same groups, datasets (same dtype, shape
and bytes) and attributes; the Result's xarray Datasets must hold the
file's variables with the same bytes, names, units and attributes; the
summary must be the program's --json output. Every attribute must be equal
too: the files record no time or place of the run (were one added, it would
go in RUN_ATTRIBUTES). The files' bytes differ (HDF5's own bookkeeping).
"""

import io
import os
import tomllib

import h5py
import numpy as np
import pytest

import aerosect
from conftest import SOURCE, run_cli

SUITE = os.path.join(SOURCE, "tests", "regression", "suite.toml")
with open(SUITE, "rb") as _f:
    CASES = tomllib.load(_f)["case"]

# Root attributes that name the moment or the file of a run: none today.
RUN_ATTRIBUTES = set()
# Attributes of HDF5's dimension scales (references differ by file; xarray
# shows them as dimensions, not attributes).
SCALE_ATTRIBUTES = {"DIMENSION_LIST", "REFERENCE_LIST", "CLASS", "NAME", "_Netcdf4Dimid", "_Netcdf4Coordinates",
                    "_nc3_strict"}


def api_arguments(command, args):
    """The suite's command-line options as (overrides, keyword arguments)."""
    overrides, kw = {}, {}
    it = iter(args)
    for opt in it:
        value = next(it)
        if opt == "--set":
            key, text = value.split("=", 1)
            overrides[key] = tomllib.loads("v = " + text)["v"]
        elif opt == "--vary":
            kw.setdefault("vary", []).append(value)
        elif opt == "--jobs":
            kw["jobs"] = int(value)
        elif opt == "--amplitude":
            kw["amplitude"] = float(value)
        else:
            kw[opt[2:]] = value
    return overrides, kw


def h5_objects(f):
    """{path: object} of every group and dataset of an open h5py.File."""
    out = {"/": f}
    f.visititems(lambda name, obj: out.setdefault(name, obj))
    return out


def attributes(obj):
    return {k: v for k, v in obj.attrs.items() if k not in SCALE_ATTRIBUTES}


def text(v):
    """h5py gives fixed-length text attributes as bytes, xarray as str."""
    return v.decode("utf-8") if isinstance(v, bytes) else v


def same_value(a, b):
    a, b = np.asarray(text(a)), np.asarray(text(b))
    if a.dtype.kind in "fiu" and b.dtype.kind in "fiu":
        return a.dtype == b.dtype and a.shape == b.shape and a.tobytes() == b.tobytes()
    return np.array_equal(a, b)


def compare_files(cli_path, data):
    with h5py.File(cli_path, "r") as a, h5py.File(io.BytesIO(data), "r") as b:
        oa, ob = h5_objects(a), h5_objects(b)
        assert sorted(oa) == sorted(ob), "the same groups and datasets"
        for path, x in oa.items():
            y = ob[path]
            ax, ay = attributes(x), attributes(y)
            assert sorted(ax) == sorted(ay), f"{path}: the same attributes"
            for k in ax:
                if path == "/" and k in RUN_ATTRIBUTES:
                    continue
                assert same_value(ax[k], ay[k]), f"{path}@{k}: {ax[k]!r} != {ay[k]!r}"
            if isinstance(x, h5py.Dataset):
                assert x.dtype == y.dtype and x.shape == y.shape, path
                assert same_value(x[()], y[()]), f"{path}: values differ"


def compare_datasets(result):
    """Each group's xarray Dataset holds the file's variables: same bytes,
    names, units and attributes."""
    with h5py.File(io.BytesIO(result.hdf5), "r") as f:
        for group in ["/", *result.groups]:
            ds = result.group(group)
            g = f[group]
            names = [k for k, v in g.items() if isinstance(v, h5py.Dataset)]
            inherited = [d for d in ds.dims if d not in names]  # the root's axes (Result.group)
            assert sorted(names + inherited) == sorted(ds.variables), f"{group}: the file's variables"
            for d in inherited:
                assert same_value(ds[d].values, f[d][()]), f"{group}: root axis {d}"
            for name in names:
                v = ds[name]
                assert isinstance(v.values, np.ndarray)
                assert same_value(v.values, g[name][()]), f"{group}/{name}: values"
                for k, x in attributes(g[name]).items():
                    assert k in v.attrs and same_value(v.attrs[k], x), f"{group}/{name}@{k}"
                # CF 1.10 §3.5: a flag variable (flag_values) carries no units.
                assert "units" in v.attrs or "flag_values" in v.attrs, f"{group}/{name} has units"
            for k, x in attributes(g).items():
                assert k in ds.attrs and same_value(ds.attrs[k], x), f"{group}@{k}"


RUNS = [(c["name"], c["file"], command, c[command])
        for c in CASES for command in ("simulate", "flutter", "gust", "sweep") if command in c]


@pytest.mark.parametrize("name,file,command,args", RUNS, ids=[f"{r[0]}-{r[2]}" for r in RUNS])
def test_command_matches_program(program, tmp_path, name, file, command, args):
    path = os.path.normpath(os.path.join(os.path.dirname(SUITE), file))
    out = str(tmp_path / f"{command}.h5")
    p = run_cli(program, [command, path, "-o", out, "--json", *args])
    import json
    cli_summary = json.loads(p.stdout)

    overrides, kw = api_arguments(command, args)
    case = aerosect.load_case(path, **overrides)
    result = getattr(aerosect, command)(case, **kw)

    compare_files(out, result.hdf5)
    compare_datasets(result)
    # The summary is the --json output, with the file's path left out.
    def without_path(v):
        if isinstance(v, dict):
            return {k: without_path(x) for k, x in v.items()}
        if isinstance(v, list):
            return [without_path(x) for x in v]
        return None if v == out else v
    expected = without_path(cli_summary)
    for k in ("elapsed_s", "wall_time_s"):
        expected.pop(k, None)
        result.summary.pop(k, None)
    assert result.summary == expected


def test_orbits_matches_program(program, tmp_path, source):
    path = os.path.join(source, "tests", "regression", "cases", "lpw_cubic.toml")
    out = str(tmp_path / "branch.h5")
    run_cli(program, ["orbits", path, "-o", out, "--points", "6"])
    result = aerosect.orbits(aerosect.load_case(path), points=6)
    compare_files(out, result.hdf5)
    compare_datasets(result)
    assert result.kind == "orbit_branch"


def test_case_forms_agree(source):
    """A case from its file, from its text and from a dict (the file read
    with Python's own TOML reader) gives the same run."""
    path = os.path.join(source, "cases", "demo_aileron.toml")
    with open(path, "rb") as f:
        text = f.read().decode()
    as_dict = tomllib.loads(text)
    runs = [aerosect.simulate(aerosect.load_case(path, simulation__duration=0.5)),
            aerosect.simulate(aerosect.load_case(toml=text, simulation__duration=0.5)),
            aerosect.simulate(aerosect.load_case(as_dict, **{"simulation.duration": 0.5}))]
    for r in runs[1:]:
        for name in runs[0].dataset.variables:
            assert same_value(r.dataset[name].values, runs[0].dataset[name].values), name
    assert runs[0].summary["completed"] is True


def test_result_save_is_the_file(tmp_path, source):
    path = os.path.join(source, "cases", "demo_aileron.toml")
    r = aerosect.flutter(path, speeds=(2, 160, 20))
    saved = r.save(str(tmp_path / "f.h5"))
    with h5py.File(saved, "r") as f:
        assert f.attrs["aerosect_file_kind"] in (b"flutter", "flutter")
    assert r.kind == "flutter"


def test_study_matches_program(program, tmp_path, source):
    """aerosect.study writes the files `aerosect study` writes (three sweep
    airspeeds, no figures, to stay short)."""
    path = os.path.join(source, "cases", "demo_aileron.toml")
    cli_dir, api_dir = str(tmp_path / "cli"), str(tmp_path / "api")
    run_cli(program, ["study", path, "-o", cli_dir, "--no-plots", "--sweep-points", "3", "--jobs", "2"])
    s = aerosect.study(path, api_dir, sweep_points=3, jobs=2, plots=False)
    assert s.summary["completed"] is True
    assert sorted(s.results) == sorted(os.path.splitext(f)[0] for f in os.listdir(cli_dir) if f.endswith(".h5"))
    for name, result in s.results.items():
        compare_files(os.path.join(cli_dir, name + ".h5"), result.hdf5)
    assert os.path.exists(os.path.join(api_dir, "report.html"))

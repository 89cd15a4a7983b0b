"""CF conventions, rule by rule, on every kind of HDF5 file aerosect writes
(issue #17 scope 2).

    AEROSECT=build/aerosect AEROSECT_SOURCE_DIR=. python3 -m pytest tests/integration/test_cf_conventions.py

The files come from the shipped demo case and the regression cases, with
short runs and few points: simulate, flutter, gust, sweep (one and two
swept keys), the merge of two sweep shards, orbits, and a study (its
response, LCO time history, flutter, sweep, gust, branch and largest-LCO
files). Each rule names the section of the CF Conventions 1.10 document it
comes from; where CF says nothing the rule says so and why it is ours.
Every group of every file is opened with h5py, netCDF4-python, xarray
(netCDF4 and, when installed, h5netcdf engines) and ncdump.
"""

import os
import re
import shutil
import subprocess

import h5py
import numpy as np
import pytest

try:
    import netCDF4
except ImportError:  # pragma: no cover - Debian's python3-netcdf4 is a test dependency
    netCDF4 = None
try:
    import xarray as xr
except ImportError:  # pragma: no cover
    xr = None
try:
    import h5netcdf  # noqa: F401
    ENGINES = ["netcdf4", "h5netcdf"]
except ImportError:
    ENGINES = ["netcdf4"]

AEROSECT = os.environ.get("AEROSECT", "")
SOURCE = os.environ.get("AEROSECT_SOURCE_DIR", os.path.join(os.path.dirname(__file__), "..", ".."))
DEMO = os.path.join(SOURCE, "cases", "demo_aileron.toml")
CUBIC = os.path.join(SOURCE, "tests", "regression", "cases", "lpw_cubic.toml")

# Attributes the HDF5 dimension-scale library writes on scales and the
# datasets attached to them (HDF5 Dimension Scale Specification); netCDF-4
# reads them as its dimensions and hides them, so CF's rules do not apply.
DIMENSION_SCALE_ATTRIBUTES = {"CLASS", "NAME", "REFERENCE_LIST", "DIMENSION_LIST",
                              "_Netcdf4Dimid", "_Netcdf4Coordinates"}
# The attributes of the HDF5 Dimension Scale library itself, the only ones
# aerosect does not write as variable-length UTF-8 strings:
# H5DSset_scale writes CLASS = "DIMENSION_SCALE" and NAME (the dimension's
# name) as fixed-length NULLTERM ASCII strings, which h5py reads as bytes;
# H5DSattach_scale writes DIMENSION_LIST and REFERENCE_LIST (object
# references, no text). CLASS and NAME cannot be variable-length: see
# test_dimension_scale_class_and_name_must_stay_fixed_length for the
# evidence (H5DSis_scale, netCDF-C, ncdump and h5netcdf stop recognising
# the scale). Every other attribute of every file is aerosect's own.
HDF5_OWNED_STRING_ATTRIBUTES = {"CLASS", "NAME"}
HDF5_OWNED_REFERENCE_ATTRIBUTES = {"DIMENSION_LIST", "REFERENCE_LIST"}
# Attributes CF defines on variables (CF 1.10 Appendix A) that are numbers.
CF_NUMERIC_VARIABLE_ATTRIBUTES = {"_FillValue", "missing_value", "valid_min", "valid_max",
                                  "valid_range", "flag_values", "flag_masks"}
# Class variables: integer codes, each code named (CF 1.10 §3.5).
CLASS_VARIABLES = {"response_class", "decay_reason", "refined", "stable", "bifurcation_kind",
                   "aerodynamic_lag", "direction"}
# Counters, as attributes or tables: integers (issue #17).
COUNTERS = {"samples", "steps", "rhs_evaluations", "switches", "points", "bifurcations",
            "cycle_samples", "complete", "cycles"}
NAME = re.compile(r"^[A-Za-z][A-Za-z0-9_]*$")


def run(*args):
    r = subprocess.run([AEROSECT, *args], capture_output=True, text=True, timeout=600)
    assert r.returncode == 0, f"aerosect {' '.join(args)}: exit {r.returncode}\n{r.stderr[-2000:]}"
    return r


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """{label: path} of every file kind, written once for all the rules."""
    if not AEROSECT or not os.access(AEROSECT, os.X_OK):
        pytest.fail("set AEROSECT to the aerosect program (ctest does)")
    d = tmp_path_factory.mktemp("cf")
    p = lambda name: str(d / name)  # noqa: E731
    run("simulate", DEMO, "-o", p("simulate.h5"), "--set", "simulation.duration=0.5")
    run("flutter", DEMO, "-o", p("flutter.h5"), "--speeds", "10:120:12")
    # A steady flight condition adds /parameters/steady, /parameters/equilibrium
    # and root attributes (issue #18).
    steady = ["--set", "steady.incidence_deg=2", "--set", "steady.gravity=9.80665"]
    run("simulate", DEMO, "-o", p("simulate_steady.h5"), "--set", "simulation.duration=0.5", *steady)
    run("flutter", DEMO, "-o", p("flutter_steady.h5"), "--speeds", "10:120:12", *steady)
    run("gust", DEMO, "-o", p("gust.h5"), "--gradients", "9.144:106.68:3")
    sweep = ["--vary", "flow.airspeed=15:27:3", "--set", "simulation.duration=5", "--jobs", "1"]
    run("sweep", DEMO, *sweep, "-o", p("sweep.h5"))
    run("sweep", DEMO, "--vary", "flow.airspeed=15:27:2", "--vary", "springs.flap.total_gap_deg=0.5:1:2",
        "--set", "simulation.duration=2", "--jobs", "1", "-o", p("sweep_2d.h5"))
    for k in (1, 2):
        run("sweep", DEMO, *sweep, "--shard", f"{k}/2", "-o", p(f"shard_{k}.h5"))
    run("merge", p("shard_1.h5"), p("shard_2.h5"), "-o", p("merged.h5"))
    run("orbits", CUBIC, "-o", p("orbits.h5"), "--from", "5.5", "--to", "7.0", "--start", "hopf",
        "--start-amplitude", "0.2", "--points", "8")
    # A shard of an orbits run that holds no branch (orbits traces one, in
    # shard 1/N): a file without the point axis.
    run("orbits", CUBIC, "-o", p("orbits_empty_shard.h5"), "--from", "5.5", "--to", "7.0", "--start", "hopf",
        "--start-amplitude", "0.2", "--points", "8", "--shard", "2/2")
    run("study", DEMO, "-o", p("study"), "--no-plots", "--jobs", "2", "--sweep-points", "4")
    out = {name[:-3]: p(name) for name in os.listdir(d) if name.endswith(".h5")}
    study = [n for n in sorted(os.listdir(p("study"))) if n.endswith(".h5")]
    assert {"response.h5", "flutter.h5", "sweep.h5", "gust.h5", "branch.h5", "lco.h5",
            "lco_orbit.h5"} <= set(study), study
    for n in study:
        out["study/" + n[:-3]] = os.path.join(p("study"), n)
    return out


KINDS = ["simulate", "simulate_steady", "flutter", "flutter_steady", "gust", "sweep", "sweep_2d", "shard_1", "merged", "orbits",
         "orbits_empty_shard", "study/response", "study/lco", "study/flutter", "study/sweep", "study/gust",
         "study/branch", "study/lco_orbit"]


def objects(f):
    """(path, object) of the root and every group and dataset."""
    found = [("/", f)]
    f.visititems(lambda name, obj: found.append(("/" + name, obj)))
    return found


def groups(f):
    return [name for name, obj in objects(f) if isinstance(obj, h5py.Group)]


def variables(f):
    return [(name, obj) for name, obj in objects(f) if isinstance(obj, h5py.Dataset)]


def own_attributes(obj):
    return {k: v for k, v in obj.attrs.items() if k not in DIMENSION_SCALE_ATTRIBUTES}


def is_flag_variable(d):
    return "flag_values" in d.attrs


@pytest.mark.parametrize("kind", KINDS)
def test_string_attributes_read_as_str(files, kind):
    """CF 1.10 §2.2: text attributes are character arrays or atomic strings;
    aerosect writes atomic (variable-length UTF-8) strings, which h5py 3
    reads as str (fixed-length ones read as bytes: h5py docs, "Strings in
    HDF5").
    Every attribute is checked but the HDF5 dimension-scale library's own
    (HDF5_OWNED_STRING_ATTRIBUTES on scales, whose form is checked to be
    exactly what H5DSset_scale writes, and the reference lists)."""
    with h5py.File(files[kind]) as f:
        for path, obj in objects(f):
            for k in obj.attrs:
                if k in HDF5_OWNED_REFERENCE_ATTRIBUTES:
                    continue
                v = obj.attrs[k]
                if k in HDF5_OWNED_STRING_ATTRIBUTES and isinstance(obj, h5py.Dataset) \
                        and h5py.h5ds.is_scale(obj.id):
                    # H5DSset_scale's fixed-length string, nothing of ours.
                    t = obj.attrs.get_id(k).get_type()
                    assert isinstance(t, h5py.h5t.TypeStringID) and not t.is_variable_str(), f"{path}@{k}"
                    assert k != "CLASS" or v == b"DIMENSION_SCALE", f"{path}@{k} = {v!r}"
                    continue
                assert not isinstance(v, (bytes, np.bytes_)), f"{path}@{k} reads as bytes: {v!r}"
                if isinstance(v, np.ndarray):
                    assert v.dtype.kind in "iuf", f"{path}@{k} is an array of {v.dtype}"


def test_dimension_scale_class_and_name_must_stay_fixed_length(files, tmp_path):
    """The evidence behind HDF5_OWNED_STRING_ATTRIBUTES (issue #17: could
    CLASS and NAME be variable-length UTF-8, so h5py reads them as str?).
    A simulation file with the scales' CLASS rewritten as a variable-length
    UTF-8 string (same text) stops being read as netCDF-4, each reader
    failing as recorded here (Debian 12: HDF5 1.10.8, netCDF-C 4.9.0,
    netCDF4-python 1.6.2, h5py 3.7, h5netcdf 1.1.0):
      - H5DSis_scale (h5py.h5ds.is_scale) returns False: HDF5 1.10's
        H5DSis_scale requires H5T_STR_NULLTERM and compares the bytes read
        into a buffer of H5Tget_size (a pointer's size for a variable-length
        string), so the text never matches;
      - netCDF4.Dataset: AttributeError 'NoneType' object has no attribute
        'dimensions' (netCDF-C finds no dimension for `time`), and xarray's
        netcdf4 engine the same;
      - ncdump -h exits 1: "NetCDF: Invalid dimension ID or name", the axis
        shown as phony_dim_0;
      - xarray's h5netcdf engine: ValueError "variable '/time' has no
        dimension scale associated with axis 0".
    NAME alone as variable-length UTF-8 passes H5DSis_scale, netCDF-C and
    ncdump, but h5netcdf 1.1.0 fails: TypeError "'in <string>' requires
    string as left operand, not bytes" (it tests b"This is a netCDF
    dimension but not a netCDF variable" in attrs["NAME"]). So both stay as
    H5DSset_scale writes them. Should a later library accept them, this
    test fails and the exception can be lifted."""
    src = files["simulate"]

    def rewritten(names):
        path = str(tmp_path / ("vlen_" + "_".join(names) + ".h5"))
        shutil.copyfile(src, path)
        with h5py.File(path, "r+") as f:
            for name, obj in objects(f):
                if isinstance(obj, h5py.Dataset) and h5py.h5ds.is_scale(obj.id):
                    for a in names:
                        text = obj.attrs[a].decode()
                        del obj.attrs[a]
                        obj.attrs.create(a, text, dtype=h5py.string_dtype("utf-8"))
        return path

    vclass = rewritten(["CLASS"])
    with h5py.File(vclass) as f:
        assert f["time"].attrs["CLASS"] == "DIMENSION_SCALE"  # now a str...
        assert not h5py.h5ds.is_scale(f["time"].id)  # ...and no longer a scale
    if netCDF4 is not None:
        with pytest.raises(AttributeError):
            netCDF4.Dataset(vclass).close()
    r = subprocess.run(["ncdump", "-h", vclass], capture_output=True, text=True)
    assert r.returncode != 0 and "Invalid dimension ID or name" in r.stderr, (r.returncode, r.stderr)
    if xr is not None and "h5netcdf" in ENGINES:
        with pytest.raises(ValueError, match="no dimension scale"):
            xr.open_dataset(vclass, engine="h5netcdf").close()
        vname = rewritten(["NAME"])
        with pytest.raises(TypeError, match="requires string as left operand"):
            xr.open_dataset(vname, engine="h5netcdf").close()
    # The file as written: every reader sees the axis.
    with h5py.File(src) as f:
        assert h5py.h5ds.is_scale(f["time"].id)


@pytest.mark.parametrize("kind", KINDS)
def test_names(files, kind):
    """CF 1.10 §2.3: variable, dimension, group and attribute names begin
    with a letter and hold letters, digits and underscores (attributes CF
    itself names with a leading underscore, _FillValue, excepted)."""
    with h5py.File(files[kind]) as f:
        for path, obj in objects(f):
            if path != "/":
                assert NAME.match(path.rsplit("/", 1)[1]), path
            for k in own_attributes(obj):
                assert NAME.match(k) or k in CF_NUMERIC_VARIABLE_ATTRIBUTES, f"{path}@{k}"


@pytest.mark.parametrize("kind", KINDS)
def test_coordinate_variables(files, kind):
    """CF 1.10 §1.3 and the netCDF User Guide: a variable with the name of a
    dimension of its own group is that dimension's coordinate variable, one-
    dimensional over it; and no scalar has the name of a dimension of an
    enclosing group (h5netcdf 1.1 reads it as that dimension's coordinate
    and fails: found by this test on the gust file's critical histories)."""
    with h5py.File(files[kind]) as f:
        scales = {}  # group -> names of the dimension scales defined there
        for path, d in variables(f):
            if d.attrs.get("CLASS") in (b"DIMENSION_SCALE", "DIMENSION_SCALE"):
                group, name = path.rsplit("/", 1)
                scales.setdefault(group or "/", set()).add(name)
        for path, d in variables(f):
            group, name = path.rsplit("/", 1)
            group = group or "/"
            visible = set()
            g = group
            while True:
                visible |= scales.get(g, set())
                if g == "/":
                    break
                g = g.rsplit("/", 1)[0] or "/"
            if name in scales.get(group, set()):
                assert d.ndim == 1, f"{path}: its group's dimension {name} is not one-dimensional"
            elif name in visible:
                assert d.ndim > 0, f"{path}: a scalar named like the dimension {name}"


@pytest.mark.parametrize("kind", KINDS)
def test_units_and_long_name(files, kind):
    """CF 1.10 §3.1 units (required for dimensional quantities; "1" for a
    pure number) and §3.2 long_name on every variable; a flag variable (§3.5)
    holds codes, not a quantity, and has no units."""
    with h5py.File(files[kind]) as f:
        for path, d in variables(f):
            assert isinstance(d.attrs.get("long_name"), str) and d.attrs["long_name"], path
            if is_flag_variable(d):
                assert "units" not in d.attrs, f"{path}: a flag variable with units"
            else:
                assert isinstance(d.attrs.get("units"), str) and d.attrs["units"], path


@pytest.mark.parametrize("kind", KINDS)
def test_flags(files, kind):
    """CF 1.10 §3.5 flags: a class variable is an integer variable with
    flag_values (the variable's type, mutually exclusive) and flag_meanings
    (one blank-separated word per value); every value it holds is a flag
    value or the declared _FillValue."""
    with h5py.File(files[kind]) as f:
        for path, d in variables(f):
            name = path.rsplit("/", 1)[1]
            if name in CLASS_VARIABLES:
                assert is_flag_variable(d), f"{path}: a class variable without flag_values"
            if not is_flag_variable(d):
                continue
            assert d.dtype.kind == "i", f"{path}: flags on a {d.dtype} variable"
            values = np.atleast_1d(d.attrs["flag_values"])
            assert values.dtype == d.dtype, f"{path}: flag_values {values.dtype}, variable {d.dtype}"
            assert len(set(values.tolist())) == values.size, f"{path}: flag values repeat"
            meanings = d.attrs["flag_meanings"]
            assert isinstance(meanings, str)
            words = meanings.split(" ")
            assert len(words) == values.size and all(NAME.match(w) for w in words), (path, meanings)
            allowed = set(values.tolist()) | ({int(d.attrs["_FillValue"])} if "_FillValue" in d.attrs else set())
            held = set(np.asarray(d[()]).ravel().tolist())
            assert held <= allowed, f"{path}: values {held - allowed} are no flag value"


@pytest.mark.parametrize("kind", KINDS)
def test_fill_values(files, kind):
    """CF 1.10 §2.5.1: _FillValue has the variable's type. Every table of a
    sweep map (over direction and the swept keys) declares one: NaN for
    doubles, -1 for integer counts and classes, for points not run and, in
    the settled-cycle tables, runs that are not periodic."""
    with h5py.File(files[kind]) as f:
        for path, d in variables(f):
            if "_FillValue" in d.attrs:
                fill = np.asarray(d.attrs["_FillValue"])
                assert fill.dtype == d.dtype and fill.size == 1, f"{path}: _FillValue {fill.dtype}, data {d.dtype}"
        if f.attrs.get("aerosect_file_kind") != "sweep":
            return
        axes = [f["response_class"].dims[k][0].name for k in range(1, f["response_class"].ndim)]
        for path, d in variables(f):
            dims = [d.dims[k][0].name for k in range(d.ndim) if len(d.dims[k])]
            if dims[:1] == ["/direction"] and dims[1:1 + len(axes)] == axes:
                assert "_FillValue" in d.attrs, f"{path}: a map table without _FillValue"
                fill = d.attrs["_FillValue"]
                assert (np.isnan(fill) if d.dtype.kind == "f" else fill == -1), (path, fill)


@pytest.mark.parametrize("kind", KINDS)
def test_time_axis_is_elapsed_time(files, kind):
    """CF 1.10 §4.4: a time coordinate (standard_name "time" or axis "T")
    has units "UNIT since EPOCH". aerosect's time axes are elapsed time in
    s since the release, with no epoch: they claim neither and say
    "elapsed" in long_name and comment."""
    with h5py.File(files[kind]) as f:
        for path, d in variables(f):
            units = d.attrs.get("units", "")
            if d.attrs.get("standard_name") == "time" or d.attrs.get("axis") == "T":
                assert " since " in units, f"{path}: a CF time coordinate without an epoch ({units!r})"
            if path.rsplit("/", 1)[1] == "time":
                assert units == "s", path
                assert "elapsed" in d.attrs["long_name"] and "not a calendar time" in d.attrs["comment"], path


@pytest.mark.parametrize("kind", KINDS)
def test_counters_are_integers(files, kind):
    """Counts are integers (issue #17; CF 1.10 §2.2 lets a variable or
    attribute have any netCDF numeric type, so an integer count is
    honest where a double is not)."""
    with h5py.File(files[kind]) as f:
        for path, obj in objects(f):
            for k, v in own_attributes(obj).items():
                if k in COUNTERS:
                    assert np.asarray(v).dtype.kind == "i", f"{path}@{k} is {np.asarray(v).dtype}"
            if isinstance(obj, h5py.Dataset) and path.rsplit("/", 1)[1] in COUNTERS and obj.ndim > 1:
                assert obj.dtype.kind == "i", f"{path} is {obj.dtype}"


@pytest.mark.parametrize("kind", KINDS)
def test_numeric_attributes_have_units(files, kind):
    """Every numeric root or group attribute NAME has its units in the text
    attribute NAME_units. CF 1.10 §3.1 defines `units` for variables only
    and an attribute cannot carry attributes, so this companion is
    aerosect's own convention (README, "Output files")."""
    with h5py.File(files[kind]) as f:
        for path in groups(f):
            g = f[path]
            for k, v in own_attributes(g).items():
                if isinstance(v, (str, bytes)):
                    continue
                u = g.attrs.get(k + "_units")
                assert isinstance(u, str) and u, f"{path}@{k} = {v!r} has no {k}_units"


def sweep_axis_name(key):
    return key.replace(".", "_")


@pytest.mark.parametrize("kind, keys", [("sweep", ["flow.airspeed"]), ("merged", ["flow.airspeed"]),
                                        ("study/sweep", ["flow.airspeed"]),
                                        ("sweep_2d", ["flow.airspeed", "springs.flap.total_gap_deg"])])
def test_sweep_axes_named_after_the_key(files, kind, keys):
    """A sweep's axes are named after the swept keys (CF 1.10 §2.3 names:
    '.' becomes '_'), keep the key in `key` and have its units (§3.1): m s-1
    for an airspeed, degree for a _deg key (UDUNITS)."""
    units = {"flow.airspeed": "m s-1", "springs.flap.total_gap_deg": "degree"}
    with h5py.File(files[kind]) as f:
        assert "value_1" not in f and "value_2" not in f
        table = f["response_class"]
        axes = [table.dims[k][0] for k in range(1, table.ndim)]
        assert [a.name for a in axes] == ["/" + sweep_axis_name(k) for k in keys]
        for a, k in zip(axes, keys):
            assert a.attrs["key"] == k and a.attrs["units"] == units[k]


@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize("engine", ENGINES)
def test_every_group_opens_in_xarray_with_its_axes(files, kind, engine):
    """CF 1.10 §5 (coordinate variables) with netCDF-4 groups (§2.7): each
    group opened alone, as xr.open_dataset(f, group=...) does, has a
    coordinate variable for every dimension of its data variables."""
    if xr is None:
        pytest.skip("xarray is not installed")
    with h5py.File(files[kind]) as f:
        names = groups(f)
    for g in names:
        with xr.open_dataset(files[kind], group=g, engine=engine, decode_timedelta=False) as ds:
            for v in ds.data_vars:
                for dim in ds[v].dims:
                    assert dim in ds.coords, f"{g}: {v} over {dim}, which has no coordinate in the group"
            for k, value in ds.attrs.items():
                assert not isinstance(value, bytes), f"{g}@{k}"


@pytest.mark.parametrize("kind", KINDS)
def test_netcdf4_and_ncdump_read_every_group(files, kind):
    """netCDF-4 readers (netCDF User Guide: HDF5 files with dimension scales
    are netCDF-4 files): ncdump -h exits 0; netCDF4-python reads every
    variable of every group, text attributes as str, with the fill value
    masked (CF 1.10 §2.5.1)."""
    if shutil.which("ncdump"):
        r = subprocess.run(["ncdump", "-h", files[kind]], capture_output=True, text=True)
        assert r.returncode == 0, r.stderr
    if netCDF4 is None:
        pytest.skip("netCDF4-python is not installed")
    with netCDF4.Dataset(files[kind]) as nc:
        todo = [nc]
        while todo:
            g = todo.pop()
            todo.extend(g.groups.values())
            for name in g.ncattrs():
                v = g.getncattr(name)
                assert not isinstance(v, bytes), f"{g.path}@{name}"
            for v in g.variables.values():
                data = v[...]
                if "_FillValue" in v.ncattrs() and v.dtype.kind == "i":
                    fill = v.getncattr("_FillValue")
                    assert not np.any(np.ma.getdata(data)[~np.ma.getmaskarray(data)] == fill), v.name


# --- The checks catch what they are for --------------------------------------
# Each rule above run on a copy of a good file changed back to a form an
# earlier aerosect wrote (or to the fault the rule names) must fail.

def _set_fixed_length_title(f):
    f.attrs["title"] = np.bytes_(b"fixed-length text")  # h5py writes bytes_ fixed-length


def _fixed_length_class_on_a_variable(f):
    # Only a dimension scale's CLASS is HDF5's; on a variable it is ours.
    f["pitch"].attrs["CLASS"] = np.bytes_(b"not a scale")


def _time_coordinate_without_epoch(f):
    f["time"].attrs["standard_name"] = "time"


def _float_class(f):
    attrs = {k: v for k, v in f["response_class"].attrs.items() if k in ("units", "long_name")}
    values = np.asarray(f["response_class"][()], dtype=float)
    dims = [f["response_class"].dims[k][0] for k in range(values.ndim)]
    del f["response_class"]
    d = f.create_dataset("response_class", data=values)
    d.attrs.update(attrs)
    for k, scale in enumerate(dims):
        d.dims[k].attach_scale(scale)


def _float_counter(f):
    f.attrs["steps"] = float(f.attrs["steps"])


def _number_without_units(f):
    del f.attrs["end_time_units"]


def _group_without_coordinates(f):
    g = f.create_group("extra")
    d = g.create_dataset("x", data=np.zeros(f["speed"].shape))
    d.attrs["units"], d.attrs["long_name"] = "1", "x"
    d.dims[0].attach_scale(f["speed"])


def _table_without_fill(f):
    del f["spread"].attrs["_FillValue"]


def _scalar_named_like_a_dimension(f):
    d = f["critical_history_1"].create_dataset("gradient", data=1.0)
    d.attrs["units"], d.attrs["long_name"] = "m", "H"


def _old_axis_name(f):
    f.move("flow_airspeed", "value_1")


def _flags_of_another_type(f):
    f["response_class"].attrs["flag_values"] = np.arange(6, dtype=np.int32)


@pytest.mark.parametrize("kind, change, rule", [
    ("simulate", _set_fixed_length_title, test_string_attributes_read_as_str),
    ("simulate", _fixed_length_class_on_a_variable, test_string_attributes_read_as_str),
    ("simulate", _time_coordinate_without_epoch, test_time_axis_is_elapsed_time),
    ("sweep", _float_class, test_flags),
    ("sweep", _flags_of_another_type, test_flags),
    ("simulate", _float_counter, test_counters_are_integers),
    ("simulate", _number_without_units, test_numeric_attributes_have_units),
    ("flutter", _group_without_coordinates, test_every_group_opens_in_xarray_with_its_axes),
    ("sweep", _table_without_fill, test_fill_values),
    ("gust", _scalar_named_like_a_dimension, test_coordinate_variables),
    ("sweep", _old_axis_name, test_sweep_axes_named_after_the_key),
])
def test_each_rule_catches_its_fault(files, tmp_path, kind, change, rule):
    bad = str(tmp_path / "bad.h5")
    shutil.copyfile(files[kind], bad)
    with h5py.File(bad, "r+") as f:
        change(f)
    extra = {test_every_group_opens_in_xarray_with_its_axes: ("netcdf4",),
             test_sweep_axes_named_after_the_key: (["flow.airspeed"],)}
    args = ({"bad": bad}, "bad") + extra.get(rule, ())
    with pytest.raises(AssertionError):
        rule(*args)

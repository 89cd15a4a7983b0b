"""The analyses of aerosect in Python (imported by `import aerosect` on first
use; see the package's docstring). A thin layer over the C++ module
aerosect._core, which runs the library as the command line does and has
the library's own writers write each result file into a private temporary
folder; the file is read back into memory whole and removed.
"""

import io
import json
import math
import numbers
import os
import re
import tempfile
import warnings

import h5py
import xarray as xr

with warnings.catch_warnings():
    # Debian's netCDF4 build warns of numpy's struct size on import (harmless).
    warnings.filterwarnings("ignore", message="numpy.ndarray size changed")
    import netCDF4

from . import InputError, NumericalError, OutputError
try:
    from . import _core
except ImportError as e:  # python/ of the source tree holds the Python files only
    raise ImportError(f"aerosect's C++ module is not in {os.path.dirname(os.path.abspath(__file__))}: "
                      "build it (tools/demo or tools/test; CMake target aerosect_python) and put "
                      "build/python on PYTHONPATH") from e

_core.set_exception_types(InputError, NumericalError, OutputError)

version = _core.version


# --- Cases ----------------------------------------------------------------------

class Case:
    """A case as read and checked by the library (read-only). `path` is the
    file, or "<toml>" / "<dict>" for a case given as text or a dict; `text`
    the TOML text read; `overrides` the "key=value" overrides applied."""

    def __init__(self, core):
        self._core = core

    path = property(lambda self: self._core.path)
    text = property(lambda self: self._core.text)
    overrides = property(lambda self: list(self._core.overrides))
    title = property(lambda self: self._core.title)
    input_form = property(lambda self: self._core.input_form)

    def text_as_run(self):
        """The case text with the overrides appended as comments."""
        return self._core.text_as_run()

    def __repr__(self):
        return f"aerosect.Case({self.path!r}, title={self.title!r}, overrides={self.overrides!r})"


_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")


def _toml_key(key):
    return key if _BARE_KEY.match(key) else json.dumps(key)


def _toml_value(v):
    """A Python value as a TOML value (the text after `key = `)."""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, numbers.Integral):
        return str(int(v))
    if isinstance(v, numbers.Real):
        x = float(v)
        if math.isnan(x):
            return "nan"
        if math.isinf(x):
            return "inf" if x > 0 else "-inf"
        return repr(x)  # the shortest text that reads back as the same double
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)  # a JSON string is a TOML basic string
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{_toml_key(str(k))} = {_toml_value(x)}" for k, x in v.items()) + " }"
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if hasattr(v, "tolist"):  # numpy scalars and arrays
        return _toml_value(v.tolist())
    raise TypeError(f"cannot write {type(v).__name__} {v!r} as a TOML value")


def _is_table_array(v):
    return isinstance(v, (list, tuple)) and len(v) > 0 and all(isinstance(x, dict) for x in v)


def _toml_document(d):
    """A dict of case tables ({"section": {...}, "gust": [{...}, ...]}) as TOML."""
    lines = []

    def table(header, t, array=False):
        if header:
            lines.append(f"[[{header}]]" if array else f"[{header}]")
        for k, v in t.items():
            if not isinstance(v, dict) and not _is_table_array(v):
                lines.append(f"{_toml_key(str(k))} = {_toml_value(v)}")
        for k, v in t.items():
            name = (header + "." if header else "") + _toml_key(str(k))
            if isinstance(v, dict):
                table(name, v)
            elif _is_table_array(v):
                for entry in v:
                    table(name, entry, array=True)

    if not isinstance(d, dict):
        raise TypeError("a case dict maps table names to tables, e.g. {'flow': {'airspeed': 30}}")
    table("", d)
    return "\n".join(lines) + "\n"


def _override_strings(overrides):
    """keyword arguments -> the command line's "key=value" strings."""
    out = []
    for k, v in overrides.items():
        key = k.replace("__", ".")
        out.append(f"{key}={_toml_value(v)}")
    return out


def load_case(source=None, /, *, toml=None, name=None, **overrides):
    """Reads and checks a case, as the command line does.

    source    a case file path (str or os.PathLike), or a dict of tables
              ({"section": {...}, "flow": {"airspeed": 30}, "gust": [{...}]})
    toml      the case as a TOML string instead
    name      the name messages give a TOML string or dict case
              (default "<toml>" / "<dict>")
    overrides keyword arguments named after the case key, "__" for each dot:
              flow__airspeed=30 is --set flow.airspeed=30.

    A TOML string or dict case reads other files it names (recorded gusts)
    relative to the current folder. Raises InputError (str(e) is the
    command line's message)."""
    sets = _override_strings(overrides)
    if toml is not None:
        if source is not None:
            raise TypeError("load_case takes a path or dict, or toml=TEXT, not both")
        return Case(_core.parse_case(toml, name or "<toml>", sets))
    if isinstance(source, dict):
        return Case(_core.parse_case(_toml_document(source), name or "<dict>", sets))
    if isinstance(source, (str, os.PathLike)):
        return Case(_core.load_case(os.fspath(source), sets))
    raise TypeError("load_case(path), load_case(dict) or load_case(toml=TEXT)")


def _as_case(case):
    return case if isinstance(case, Case) else load_case(case)


# --- Results ----------------------------------------------------------------------

class Result:
    """One result file of a run, in memory.

    hdf5     the file's bytes: the HDF5 document the command line writes
             (save(path) writes it out, byte for byte)
    dataset  the root group as an xarray.Dataset (numpy arrays, loaded)
    groups   the paths of the file's groups that hold variables
             ("nominal/state_space", ...); group(path) reads one
    summary  the command line's --json summary as a dict (the file's path
             in it is None: the result was not written to a file)
    kind     the file's aerosect_file_kind ("simulation", "flutter", ...)
    """

    def __init__(self, data, summary=None):
        self.hdf5 = bytes(data)
        self.summary = summary
        with h5py.File(io.BytesIO(self.hdf5), "r") as f:
            kind = f.attrs.get("aerosect_file_kind")
            self.kind = kind.decode() if isinstance(kind, bytes) else None if kind is None else str(kind)
            groups = []

            def visit(name, obj):
                if isinstance(obj, h5py.Group) and any(isinstance(x, h5py.Dataset) for x in obj.values()):
                    groups.append(name)
            f.visititems(visit)
        self.groups = groups
        self.dataset = None
        self.dataset = self.group("/")

    @classmethod
    def from_file(cls, path, summary=None):
        with open(path, "rb") as f:
            return cls(f.read(), summary)

    def group(self, path):
        """The group at `path` ("/" the root) as an xarray.Dataset, loaded,
        as stored (decode_cf=False: no fill-value masking, no time or unit
        decoding, every attribute as in the file; xr.decode_cf(ds) decodes).
        A dimension the group shares with the root (a flutter method's
        `speed` and `mode`) gets the root's coordinate variable."""
        # netCDF-C reads the image in memory (it resolves a group's variable
        # named like a parent's dimension, as ncdump does; h5netcdf does not).
        nc = netCDF4.Dataset(f"{self.kind or 'aerosect'}.h5", mode="r", memory=self.hdf5)
        try:
            node = nc if path in ("/", "") else nc[path.strip("/")]
            with xr.open_dataset(xr.backends.NetCDF4DataStore(node), decode_cf=False) as ds:
                ds = ds.load()
        finally:
            if nc.isopen():  # the store closes it with the Dataset
                nc.close()
        if path not in ("/", ""):
            root = self.dataset
            shared = {d: root[d] for d in ds.dims
                      if d not in ds.variables and d in root.coords and root.sizes[d] == ds.sizes[d]}
            ds = ds.assign_coords(shared)
        return ds

    def __getitem__(self, name):
        return self.dataset[name]

    def save(self, path):
        """Writes the HDF5 file to `path` (as the command line's -o would)."""
        with open(path, "wb") as f:
            f.write(self.hdf5)
        return path

    def __repr__(self):
        return f"<aerosect.Result kind={self.kind!r}, {len(self.hdf5)} bytes, groups={self.groups!r}>"


def _summary(text, path):
    """The --json summary, with the temporary file's path replaced by None."""
    def clean(v):
        if isinstance(v, dict):
            return {k: clean(x) for k, x in v.items()}
        if isinstance(v, list):
            return [clean(x) for x in v]
        return None if isinstance(v, str) and path is not None and v == path else v
    return clean(json.loads(text))


def _attach_partial(error, path, partial):
    """Sets error.partial: the Result of the part a run finished before it
    was interrupted or failed (None when it kept nothing). The C++ module
    names the file and its summary in `partial` (interrupted runs); a
    NumericalError of a simulation leaves NAME.incomplete.h5 (the history up
    to the trouble), read with no summary (the file's root attributes say
    where and why the run stopped)."""
    kept = partial.get("path")
    if kept is None:
        incomplete = os.path.splitext(path)[0] + ".incomplete.h5"
        kept = incomplete if os.path.exists(incomplete) else None
    result = None
    if kept is not None and os.path.exists(kept):
        try:
            text = partial.get("summary")
            result = Result.from_file(kept, None if text is None else _summary(text, kept))
        except (OSError, ValueError) as e:  # never hide the run's own exception
            error.partial_error = f"the part kept in {kept} could not be read: {e}"
    error.partial = result


def _run_to_file(kind, call):
    """Runs `call(path, partial)` with `path` in a private temporary folder,
    reads the file written back (or the path call returns) and removes the
    folder. Interrupted (KeyboardInterrupt) or failing numerically
    (NumericalError), the exception carries the part finished as `partial`
    (a Result, or None)."""
    with tempfile.TemporaryDirectory(prefix="aerosect-") as tmp:
        path = os.path.join(tmp, kind + ".h5")
        partial = {}
        try:
            out = call(path, partial)
        except (KeyboardInterrupt, NumericalError) as e:
            _attach_partial(e, path, partial)
            raise
        text, written = (out, path) if isinstance(out, str) else out
        return Result.from_file(written, _summary(text, written))


def _range(value, what):
    """None, "FROM:TO:N" or (FROM, TO, N) -> the text the library parses."""
    if value is None:
        return ""
    if isinstance(value, str):
        return value
    try:
        lo, hi, n = value
    except (TypeError, ValueError):
        raise TypeError(f"{what}: give \"FROM:TO:N\" or (FROM, TO, N), not {value!r}") from None
    return f"{float(lo)!r}:{float(hi)!r}:{int(n)}"


# --- Analyses -----------------------------------------------------------------------

def check(case):
    """The case checked and summarised (aerosect check --json) as a dict."""
    return json.loads(_core.check(_as_case(case)._core))


def simulate(case):
    """Time response to the initial conditions (aerosect simulate). A run
    the engine stopped early returns the part computed (the file the
    command line keeps as NAME.incomplete.h5; summary["completed"] is
    False). Interrupted (KeyboardInterrupt) or failing (NumericalError), the
    exception's `partial` is the time history up to there (a Result:
    partial.dataset)."""
    c = _as_case(case)

    def call(path, partial):
        text, written, _ = _core.simulate(c._core, path, partial)
        return text, written
    return _run_to_file("run", call)


def flutter(case, *, speeds=None, method="both", amplitude=None):
    """Linear flutter and divergence (aerosect flutter): speeds "FROM:TO:N"
    or (FROM, TO, N) in m/s TAS (default: the case's), method "state-space",
    "pk" or "both", amplitude: also linearise nonlinear springs by their
    describing function at this amplitude (degrees for pitch/flap, m for
    plunge)."""
    c = _as_case(case)
    speeds = _range(speeds, "speeds")
    return _run_to_file("flutter", lambda path, _: _core.flutter(c._core, path, speeds, method, amplitude))


def gust(case, *, gradients=None, keep_initial=False):
    """Discrete-gust gradient sweep (aerosect gust): gradients "FROM:TO:N" or
    (FROM, TO, N) in m (default: 12 over 9.144..106.68 m); keep_initial
    starts every run from the case's [initial] conditions."""
    c = _as_case(case)
    gradients = _range(gradients, "gradients")
    return _run_to_file("gust", lambda path, _: _core.gust(c._core, path, gradients, bool(keep_initial)))


def sweep(case, vary, *, direction="both", restart="continue", jobs=None, traces=False, with_gusts=False):
    """LCO map (aerosect sweep): vary one or two case keys, as a dict
    {"flow.airspeed": (10, 60, 26)} (values "FROM:TO:N" or (FROM, TO, N)) or
    the command line's "KEY=FROM:TO:N" strings; direction "up", "down" or
    "both"; restart "continue" or "fresh"; jobs threads (default: every
    core). Unlike the command line it keeps no journal (a sweep is not
    resumed); interrupted (KeyboardInterrupt), or when the flutter overlay
    fails (NumericalError), the exception's `partial` is the map of the
    points finished (a Result; cells not run hold the fill value,
    summary["points_computed"] counts the finished points)."""
    c = _as_case(case)
    if isinstance(vary, str):
        vary = [vary]
    elif isinstance(vary, dict):
        vary = [f"{k}={_range(v, 'vary')}" for k, v in vary.items()]
    return _run_to_file("sweep", lambda path, partial: _core.sweep(c._core, path, list(vary), direction, restart,
                                                                    jobs, bool(traces), bool(with_gusts), partial))


def orbits(case, *, key=None, from_=None, to=None, start="auto", start_amplitude=None, points=200, watch=None):
    """Limit cycles by shooting, continued in a case key (aerosect orbits):
    key (default flow.airspeed, or nondimensional.reduced_speed), the window
    from_..to in the key's units, start "auto", "hopf", "march" or
    "describing", points (most orbits), watch "plunge", "pitch" or "flap".
    Interrupted (KeyboardInterrupt), the exception's `partial` is the
    branch of the orbits found so far (a Result; root attribute complete =
    0), as the command line writes it."""
    c = _as_case(case)
    return _run_to_file("branch", lambda path, partial: _core.orbits(c._core, path, key or "", from_, to, start,
                                                                      start_amplitude, int(points), watch or "",
                                                                      partial))


class Study:
    """A finished study: its folder, the summary (aerosect study --json) and
    every HDF5 file of the folder as a Result (results["flutter"], ...)."""

    def __init__(self, directory, summary, results):
        self.directory = directory
        self.summary = summary
        self.results = results

    def __repr__(self):
        return f"<aerosect.Study {self.directory!r}: {', '.join(self.results)}>"


def study(case, directory, *, jobs=None, sweep_points=41, sweep_speeds=None, plots=True):
    """The whole clearance study into `directory` (aerosect study -o
    DIRECTORY): flutter, freeplay band, LCO sweep, design gusts, the HDF5
    files, the figures (aerosect.plot; plots=False skips them) and
    report.html. Interrupted, the files finished so far stay there and
    summary.json lists the stages done."""
    from . import plot
    c = _as_case(case)
    speeds = _range(sweep_speeds, "sweep_speeds")
    directory = os.fspath(directory)
    _core.begin_study(directory)
    r = _core.run_study(c._core, directory, jobs, int(sweep_points), speeds)
    figures, notes = [], []
    if not plots:
        notes.append("figures not made: plots=False was given")
    for h5 in r.hdf5_files if plots else []:
        try:
            figures += plot.plot_file(os.path.join(directory, h5), directory)
        except (plot.PlotError, OSError) as e:
            notes.append(f"figures of {h5} not made: the plotting module said: {e}")
    summary = json.loads(_core.finish_study(c._core, r, figures, notes))
    results = {os.path.splitext(h5)[0]: Result.from_file(os.path.join(directory, h5)) for h5 in r.hdf5_files}
    return Study(directory, summary, results)

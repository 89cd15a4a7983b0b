"""aerosect in Python: the same C++ library as the command line, in-process.

    import aerosect
    case = aerosect.load_case("cases/demo_aileron.toml", flow__airspeed=30)
    run = aerosect.simulate(case)          # aerosect.Result
    run.dataset["pitch"]                   # xarray, the HDF5 file's names/units
    aerosect.flutter(case).summary["flutter_speed"]

Cases (load_case): a file path, a TOML string (toml=...) or a dict, with
overrides as keyword arguments named after the case key, a double
underscore standing for each dot (flow__airspeed=30 is the command line's
--set flow.airspeed=30; gust__1__amplitude=5 sets the first [[gust]] table's
amplitude); **{"flow.airspeed": 30} works too.

Analyses (each takes a Case, or anything load_case takes): simulate,
flutter, gust, sweep, orbits, study. They run in the library with the GIL
released (other Python threads go on) and stop on Ctrl-C with
KeyboardInterrupt. Each returns a Result: the very HDF5 document the command
line writes, in memory (Result.hdf5, Result.save), read as xarray Datasets
(Result.dataset, Result.group) with the same variable names, units and
attributes, and the command line's --json summary as a dict
(Result.summary). study writes its folder as the command line does.

Bad input raises InputError (a ValueError) with the message the command line
prints; numerical trouble NumericalError (a RuntimeError); an output that
cannot be written OutputError (an OSError). The KeyboardInterrupt or
NumericalError of a run cut short carries the part it finished as
`partial` (a Result, or None): simulate's history so far, sweep's finished
points, the orbits found so far.

    aerosect.plot   figures of result files (tools/plot is its command line)

Submodules and the C++ module are imported on demand (matplotlib and xarray
are slow to load; aerosect.plot needs neither the C++ module nor xarray).
"""


class InputError(ValueError):
    """Bad input (a case file or value, an option): str(e) is the command
    line's message (FILE:LINE:COL: key 'KEY' = VALUE: PROBLEM, then the
    allowed values). Attributes: file, line, column, key, value, problem,
    allowed."""


class NumericalError(RuntimeError):
    """The integration could not continue (attribute `time`, s; `partial`,
    the part of the run finished before, a Result or None)."""


class OutputError(OSError):
    """A result file could not be written (attribute `path`)."""


_API = ("Case", "Result", "Study", "load_case", "check", "simulate", "flutter", "gust", "sweep", "orbits",
        "study", "version")


def __getattr__(name):
    if name in _API:
        from . import api
        return getattr(api, name)
    raise AttributeError(f"module 'aerosect' has no attribute '{name}'")


def __dir__():
    return sorted(list(globals()) + list(_API))

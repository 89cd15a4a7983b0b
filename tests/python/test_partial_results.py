"""Partial results through the Python API: a run interrupted by Ctrl-C
(SIGINT, KeyboardInterrupt) or failing numerically (NumericalError) keeps
the part it finished on the exception, as `exc.partial` (a Result: the HDF5
document the command line keeps, read as xarray), as the command line keeps
NAME.incomplete.h5 (simulate), its journal (sweep) and the orbits found so
far (orbits).

- simulate, SIGINT from a timer thread (os.kill on this process): the
  partial time history is a prefix of the complete run's, sample for sample
  and bit for bit (the run is deterministic: the same steps up to the stop);
- simulate failing numerically (a softening cubic pitch spring, a
  finite-time blow-up: x'' ~ +x^3): the history up to the trouble;
- sweep, SIGINT (a timer thread again): the map of the points finished, each equal to the same
  point of the uninterrupted sweep, the others at the fill value;
- flutter, SIGINT: nothing is kept (one unit of work), partial is None.
Common practice, no source: a run cut short must not lose what it finished.
"""

import os
import signal
import threading

import numpy as np
import pytest

import aerosect
from conftest import SOURCE

DEMO = os.path.join(SOURCE, "cases", "demo_aileron.toml")

# A softening cubic pitch spring released at 30 degrees: the restoring
# moment turns negative and the pitch runs away in finite time (the same
# section as tests/integration/test_integrity.py's "numerical trouble" case).
BLOW_UP = """
[nondimensional]
mass_ratio = 100.0
elastic_axis = -0.5
cg_offset = 0.25
radius_of_gyration = 0.5
frequency_ratio = 0.2
reduced_speed = 4.0
[springs.pitch]
law = "cubic"
cubic_coefficient = -10.0
[initial]
pitch_deg = 30.0
[simulation]
duration_semichords = 200
"""


def interrupt_after(seconds):
    """SIGINT to this process after `seconds` (Python raises
    KeyboardInterrupt in the main thread, as for Ctrl-C)."""
    t = threading.Timer(seconds, os.kill, (os.getpid(), signal.SIGINT))
    t.start()
    return t


def test_simulate_interrupted_keeps_the_history_so_far():
    # 6000 s of flight (6 million 1 ms samples): half a minute or more of
    # work, cut after 1.5 s.
    case = aerosect.load_case(DEMO, simulation__duration=6000.0)
    timer = interrupt_after(1.5)
    try:
        with pytest.raises(KeyboardInterrupt) as e:
            aerosect.simulate(case)
    finally:
        timer.cancel()
    part = e.value.partial
    assert part is not None, getattr(e.value, "partial_error", "")
    assert part.summary["completed"] is False and part.summary["status"] == "cancelled"
    ds = part.dataset
    n = ds.sizes["time"]
    assert n > 10
    end = float(ds["time"][-1])
    assert 0 < end < 6000.0
    # The complete run up to the same time holds the same samples.
    full = aerosect.simulate(aerosect.load_case(DEMO, simulation__duration=end)).dataset
    assert full.sizes["time"] >= n
    for name in ("time", "plunge", "pitch", "flap", "lift"):
        assert np.array_equal(ds[name].values, full[name].values[:n]), name


def test_simulate_numerical_error_keeps_the_history_up_to_the_trouble():
    case = aerosect.load_case(toml=BLOW_UP, name="blow_up.toml")
    with pytest.raises(aerosect.NumericalError) as e:
        aerosect.simulate(case)
    part = e.value.partial
    assert part is not None, getattr(e.value, "partial_error", "")
    ds = part.dataset
    assert ds.sizes["time"] > 1
    # Up to the trouble: the last sample is no later than the error's time
    # (s), and every kept sample is finite.
    assert float(ds["time"][-1]) <= e.value.time
    assert np.all(np.isfinite(ds["pitch"].values))


def test_sweep_interrupted_keeps_the_points_finished():
    # 50 000 airspeeds each way afresh (runs stop early once settled, about
    # 0.4 ms a point here with exact propagation), one thread: about 40 s;
    # cut after 6 s. (With 5000 each way the whole sweep now ends within
    # 3 s: the signal then comes after the last point. Before the first
    # point every swept value is checked against the case, twice, about
    # 1 s each here: under ctest -j2 a cut after 3 s once came before any
    # point had finished.)
    case = aerosect.load_case(DEMO, simulation__duration=60)
    timer = interrupt_after(6.0)
    try:
        with pytest.raises(KeyboardInterrupt) as e:
            aerosect.sweep(case, {"flow.airspeed": (20, 60, 50000)}, restart="fresh", jobs=1)
    finally:
        timer.cancel()
    part = e.value.partial
    assert part is not None, getattr(e.value, "partial_error", "")
    done = part.summary["points_computed"]
    assert part.summary["completed"] is False
    assert 0 < done < 100000
    ds = part.dataset
    cls = ds["response_class"].values
    ran = cls != ds["response_class"].attrs["_FillValue"]
    assert int(ran.sum()) == done
    # A finished point is the uninterrupted sweep's point (fresh starts: a
    # point depends on its value alone). The first airspeed going up, 20 m/s
    # exactly on any grid, against a sweep 20:60:2 run to the end, every
    # variable of that cell bit for bit.
    assert ran[0, 0]
    again = aerosect.sweep(case, {"flow.airspeed": (20, 60, 2)}, direction="up", restart="fresh", jobs=1).dataset
    assert float(again["flow_airspeed"][0]) == float(ds["flow_airspeed"][0]) == 20.0
    compared = 0
    for name, v in again.data_vars.items():
        if name not in ds or "flow_airspeed" not in v.dims or v.dims != ds[name].dims:
            continue
        cell = {d: 0 for d in v.dims if d in ("direction", "flow_airspeed")}
        x, y = v.isel(cell).values, ds[name].isel(cell).values
        assert np.array_equal(x, y, equal_nan=np.issubdtype(x.dtype, np.floating)), name
        compared += 1
    assert compared >= 5


def test_flutter_interrupted_keeps_nothing():
    timer = interrupt_after(0.3)
    try:
        with pytest.raises(KeyboardInterrupt) as e:
            # Many speeds: seconds of work.
            aerosect.flutter(DEMO, speeds=(1, 200, 40000))
    finally:
        timer.cancel()
    assert e.value.partial is None

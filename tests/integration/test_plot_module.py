#!/usr/bin/python3
"""The plotting module (python/aerosect/plot.py) used in-process, as a
library: each figure function on files the program writes, the file-level
entry point, the refusal of other files, and the command-line wrapper
tools/plot giving the same paths as the module.

    test_plot_module.py AEROSECT SOURCE_DIR

Checks what the program's own files give (common practice, no source):
every figure is a PNG of the module's width (WIDTH_IN x DPI pixels), each
function returns the paths it wrote, and main() answers 2 with a message for
a file that is not an aerosect result.
"""

import contextlib
import io
import os
import struct
import subprocess
import sys
import tempfile

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from test_plot_flutter import Checks  # noqa: E402

AEROSECT, SOURCE = sys.argv[1], sys.argv[2]
sys.path.insert(0, os.path.join(SOURCE, "python"))
import h5py  # noqa: E402
import numpy as np  # noqa: E402

from aerosect import plot  # noqa: E402

CASE = """title = "plot module test"
[nondimensional]
mass_ratio = 100.0
elastic_axis = -0.5
cg_offset = 0.25
radius_of_gyration = 0.5
frequency_ratio = 0.2
reduced_speed = 5.0
[springs.pitch]
law = "freeplay"
half_gap_deg = 0.5
[initial]
pitch_deg = 2.0
[simulation]
duration_semichords = 200.0
sample_interval_semichords = 1.0
"""


def png_size(path):
    with open(path, "rb") as f:
        head = f.read(24)
    assert head[:8] == b"\x89PNG\r\n\x1a\n", f"{path} is not a PNG"
    return struct.unpack(">II", head[16:24])


def check_png(path):
    assert os.path.isfile(path), f"{path} was not written"
    width, height = png_size(path)
    expected = round(plot.WIDTH_IN * plot.DPI)
    assert abs(width - expected) <= 2, f"{path}: {width} px wide, expected {expected}"
    assert height > 100, f"{path}: only {height} px high"


def run(*args):
    result = subprocess.run([AEROSECT, *args], capture_output=True, text=True)
    assert result.returncode == 0, f"aerosect {' '.join(args)}: {result.stderr}"


def check_figure_functions(work):
    """Each figure function, called on an open file, returns the path it wrote."""
    sim, flut = os.path.join(work, "run.h5"), os.path.join(work, "flutter.h5")
    with h5py.File(sim, "r") as f:
        path = plot.plot_time_histories(f, "run", work)
        assert path == os.path.join(work, "run_time.png"), path
        check_png(path)
        path = plot.plot_phase_portraits(f, "run", work)
        assert path == os.path.join(work, "run_phase.png"), path
        check_png(path)
    # The V-g axes say which sign of damping is unstable (common practice, no
    # source: a reader must not have to guess the convention): every figure
    # is handed to save(), which records the damping axes' labels here.
    ylabels = []
    real_save = plot.save

    first_curve = {}

    def recording_save(fig, path):
        ylabels.extend(ax.get_ylabel() for ax in fig.axes)
        first_curve[os.path.basename(path)] = np.asarray(fig.axes[0].lines[0].get_ydata(), dtype=float)
        return real_save(fig, path)

    plot.save = recording_save
    with h5py.File(flut, "r") as f:
        speed, reference, labels = plot.flutter_axes(f)
        path = plot.plot_vg(f, "flutter", work, speed, reference, labels)
        assert path == os.path.join(work, "flutter_vg.png"), path
        check_png(path)
        path = plot.plot_vg_gaps(f, "flutter", work, speed, reference, labels)
        assert path == os.path.join(work, "flutter_vg_gaps.png"), path
        check_png(path)
        # The same figures with g = 2 zeta on the damping axis (the V-g
        # convention of structural damping; g = 2 zeta for light damping:
        # common practice, no source): the curves are twice the ratio's.
        path = plot.plot_vg(f, "flutter_g", work, speed, reference, labels, damping="g")
        check_png(path)
    plot.save = real_save
    damping = [y for y in ylabels if y.startswith("damping ratio")]
    assert len(damping) == 2 and all("negative damping = unstable" in y for y in damping), ylabels
    ratio, g = first_curve["flutter_vg.png"], first_curve["flutter_g_vg.png"]
    assert np.array_equal(g, 2 * ratio), (ratio[:3], g[:3])
    g_axes = [y for y in ylabels if y.startswith("damping $g = 2")]
    assert len(g_axes) == 1 and "negative damping = unstable" in g_axes[0], ylabels


def check_plot_file(work):
    """plot_file: the kind read from the file's own attribute, every figure of it."""
    out = os.path.join(work, "by_file")
    paths = plot.plot_file(os.path.join(work, "run.h5"), out)
    assert [os.path.basename(p) for p in paths] == ["run_time.png", "run_phase.png"], paths
    for p in paths:
        check_png(p)
    paths = plot.plot_file(os.path.join(work, "flutter.h5"), out)
    assert [os.path.basename(p) for p in paths] == ["flutter_vg.png", "flutter_vg_gaps.png"], paths


def check_refusals(work):
    """A file that is not an aerosect result: PlotError from plot_file, 2 from main."""
    other = os.path.join(work, "other.h5")
    with h5py.File(other, "w") as f:
        f["x"] = [1.0, 2.0]
    try:
        plot.plot_file(other, work)
    except plot.PlotError as e:
        assert "aerosect_file_kind" in str(e), str(e)
    else:
        raise AssertionError("plot_file accepted a file without aerosect_file_kind")
    text = os.path.join(work, "not_hdf5.h5")
    with open(text, "w") as f:
        f.write("not HDF5\n")
    for path in (other, text):
        err = io.StringIO()
        with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
            status = plot.main([path])
        assert status == 2, f"main() gave {status} for {path}"
        assert err.getvalue().startswith(f"plot: {path}: "), err.getvalue()


def check_main_and_wrapper(work):
    """main() prints the paths written; tools/plot (the wrapper) prints the same."""
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        status = plot.main([os.path.join(work, "run.h5"), "-o", os.path.join(work, "main")])
    assert status == 0
    in_process = out.getvalue().split()
    result = subprocess.run([sys.executable, os.path.join(SOURCE, "tools", "plot"),
                             os.path.join(work, "run.h5"), "-o", os.path.join(work, "main")],
                            capture_output=True, text=True)
    assert result.returncode == 0, result.stderr
    assert result.stdout.split() == in_process, (result.stdout, in_process)


def check_initial_state_note(work):
    """The gust-sweep figure's note that the peaks hold the release transient
    comes from the file's initial_state attribute, also when the initial
    state was set on the command line; without --keep-initial the runs
    start from rest whatever the case says (common practice, no source)."""
    demo = os.path.join(SOURCE, "cases", "demo_aileron.toml")
    at_rest, moved = os.path.join(work, "gust_rest.h5"), os.path.join(work, "gust_moved.h5")
    run("gust", demo, "--gradients", "9.144:106.68:2", "--set", "initial.pitch_deg=0",
        "--set", "initial.flap_deg=0", "-o", at_rest)
    run("gust", demo, "--gradients", "9.144:106.68:2", "--set", "initial.flap_deg=0", "--keep-initial",
        "-o", moved)
    default = os.path.join(work, "gust_default.h5")
    run("gust", demo, "--gradients", "9.144:106.68:2", "-o", default)
    with h5py.File(default, "r") as f:
        assert plot.text_attribute(f, "initial_state") == "rest", plot.text_attribute(f, "initial_state")
        assert plot.initial_conditions_note(f) is None
    with h5py.File(at_rest, "r") as f:
        assert plot.text_attribute(f, "initial_state") == "rest", plot.text_attribute(f, "initial_state")
        assert plot.initial_conditions_note(f) is None
    with h5py.File(moved, "r") as f:
        state = plot.text_attribute(f, "initial_state")
        assert state == "pitch 0.0174533 rad", state  # the demo's 1 degree, in rad
        note = plot.initial_conditions_note(f)
        assert note is not None and "pitch 0.0174533 rad" in note, note


def check_prediction_segments(work):
    """The describing-function curves of a sweep file: each branch one
    continuous line in the file's order along it, solid where stable and
    dashed where not, the runs joined at a change of stability, no point
    left out (common practice, no source)."""
    path = os.path.join(work, "sweep.h5")
    run("sweep", os.path.join(work, "case.toml"), "--vary", "nondimensional.reduced_speed=4:6:2",
        "--set", "simulation.duration_semichords=100", "--jobs", "1", "-o", path)
    with h5py.File(path, "r") as f:
        g = f["lco_prediction"]
        value, amplitude = g["value"][()], g["amplitude"][()]
        stable, branch = g["stable"][()], g["branch"][()]
        ends = plot.text_attribute(g, "branch_end", "")
        for png in plot.plot_sweep(f, "sweep", work):
            check_png(png)
    assert len(ends.split(",")) == len(set(branch)), (ends, set(branch))
    segments = plot.prediction_segments(value, amplitude, stable, branch)
    assert any(s for _, _, s in segments), "no stable segment"
    covered = 0
    for b in sorted(set(branch)):
        sel = branch == b
        runs = [(x, y, s) for x, y, s in segments if len(x) and any(
            np.array_equal(x, value[sel][i:i + len(x)]) for i in range(sel.sum() - len(x) + 1))]
        # Runs of one branch, in order, each starting on the previous one's last point.
        joined = np.concatenate([runs[0][0]] + [x[1:] for x, _, _ in runs[1:]])
        assert np.array_equal(joined, value[sel]), f"branch {b}: the runs do not follow the file order"
        for (_, _, s0), (_, _, s1) in zip(runs, runs[1:]):
            assert s0 != s1, f"branch {b}: two neighbouring runs of the same stability"
        covered += sel.sum()
        # Continuous to plotting accuracy: no step along the branch larger
        # than 5 % of the prediction's speed range.
        span = np.ptp(value) or 1.0
        steps = np.abs(np.diff(value[sel]))
        assert steps.size == 0 or steps.max() <= 0.05 * span, f"branch {b}: a step of {steps.max()}"
    assert covered == len(value)


def main():
    checks = Checks()
    with tempfile.TemporaryDirectory(prefix="aerosect-plot-module-") as work:
        case = os.path.join(work, "case.toml")
        with open(case, "w") as f:
            f.write(CASE)
        run("simulate", case, "-o", os.path.join(work, "run.h5"))
        run("flutter", case, "--speeds", "0.5:8:16", "-o", os.path.join(work, "flutter.h5"))
        checks.run("figure functions return the paths they wrote", check_figure_functions, work)
        checks.run("plot_file plots every figure of the file's kind", check_plot_file, work)
        checks.run("other files are refused", check_refusals, work)
        checks.run("main and the tools/plot wrapper agree", check_main_and_wrapper, work)
        checks.run("the initial-state note comes from the file's attribute", check_initial_state_note, work)
        checks.run("describing-function curves: one continuous line per branch", check_prediction_segments, work)
    return checks.summary()


if __name__ == "__main__":
    sys.exit(main())

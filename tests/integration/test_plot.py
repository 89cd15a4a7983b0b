#!/usr/bin/python3
"""tools/plot on files the CLI writes, one check per file kind.

    test_plot.py AEROSECT SOURCE_DIR [--keep DIR]

Runs AEROSECT (simulate, flutter, sweep with one and two keys, gust) on
SOURCE_DIR/cases/demo_aileron.toml (freeplay, a design gust), on a
regulation-sized variant of its gust and on a variant without freeplay or
gusts, then SOURCE_DIR/tools/plot on every file, and checks the PNG files:
the paths printed one per line (the study command parses them), each a PNG
about 900 px wide and not nearly empty, and the panels that depend on the
data (the gust trace, the U_ds panel) present only when the file has that
data. With --keep, the files and plots are left in DIR to be looked at.
Prints one line per check and a last line "N passed, M failed".
"""

import argparse
import os
import subprocess
import sys
import tempfile

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from test_plot_flutter import Checks, png_size, run_plot  # noqa: E402

DPI = 120  # tools/plot's resolution, px per inch


def case_variants(source_dir, workdir):
    """{name: case path}: the demo, the demo without freeplay and gusts, and
    the demo with its gust sized by CS-25.341(a) and started from rest."""
    with open(os.path.join(source_dir, "cases", "demo_aileron.toml")) as fh:
        demo = fh.read()
    assert "[springs.flap]" in demo and "[[gust]]" in demo and "[envelope]" in demo, \
        "the demo case no longer has the tables these variants edit"
    plain = demo.split("[springs.flap]")[0] + "[envelope]" + \
        demo.split("[envelope]", 1)[1].split("[[gust]]")[0]
    assert "pitch_deg = 1.0\nflap_deg = 2.0" in demo, "the demo's [initial] table changed"
    regulation = demo.replace("pitch_deg = 1.0\nflap_deg = 2.0", "")
    regulation = regulation.replace(
        "amplitude_eas = 10.0", 'design = "cs-25"\nlanding_weight_ratio = 0.9\n'
        "zero_fuel_weight_ratio = 0.8\nmax_operating_altitude = 4000.0")
    assert 'design = "cs-25"' in regulation, "the demo gust has no amplitude_eas to replace"
    paths = {}
    for name, text in (("demo", demo), ("plain", plain), ("regulation", regulation)):
        paths[name] = os.path.join(workdir, f"{name}.toml")
        with open(paths[name], "w") as fh:
            fh.write(text)
    return paths


def run_cli(aerosect, *args):
    result = subprocess.run([aerosect, *args], capture_output=True, text=True, timeout=600)
    assert result.returncode == 0, f"aerosect {' '.join(args)}: exit {result.returncode}: " \
        f"{result.stderr}"


def plots_of(source_dir, path, outdir, suffixes):
    """Runs tools/plot; checks the printed paths and each PNG; returns
    {suffix: (width, height)}."""
    result = run_plot(source_dir, path, outdir)
    assert result.returncode == 0, f"tools/plot exit {result.returncode}: {result.stderr}"
    stem = os.path.splitext(os.path.basename(path))[0]
    expected = [os.path.join(outdir, f"{stem}{suffix}.png") for suffix in suffixes]
    written = result.stdout.splitlines()
    assert written == expected, f"printed {written}, expected {expected}"
    sizes = {}
    for suffix, png in zip(suffixes, written):
        # Common practice, no source: a plot with axes, lines and text
        # compresses to well over 10 kB; an empty figure to a few kB.
        assert os.path.getsize(png) > 10000, f"{png} is nearly empty"
        width, height = png_size(png)
        # 7.5 in at 120 dpi (the tool's figure width) is 900 px.
        assert width == 900 and 300 < height < 2000, f"{png} is {width} x {height}"
        sizes[suffix] = (width, height)
    return sizes


def check_simulation(aerosect, source_dir, workdir, cases):
    out = os.path.join(workdir, "plots")
    gusty = os.path.join(workdir, "demo_sim.h5")
    plain = os.path.join(workdir, "plain_sim.h5")
    run_cli(aerosect, "simulate", cases["demo"], "-o", gusty)
    run_cli(aerosect, "simulate", cases["plain"], "-o", plain)
    with_gust = plots_of(source_dir, gusty, out, ["_time", "_phase"])
    without = plots_of(source_dir, plain, out, ["_time", "_phase"])
    # The gust file has one more panel (the gust velocity): 1.3 in = 156 px
    # taller at the tool's panel height.
    grown = with_gust["_time"][1] - without["_time"][1]
    assert grown == round(1.3 * DPI), f"gust panel adds {grown} px, expected 156"


def check_flutter(aerosect, source_dir, workdir, cases):
    out = os.path.join(workdir, "plots")
    demo = os.path.join(workdir, "demo_flutter.h5")
    plain = os.path.join(workdir, "plain_flutter.h5")
    run_cli(aerosect, "flutter", cases["demo"], "-o", demo)
    run_cli(aerosect, "flutter", cases["plain"], "-o", plain)
    plots_of(source_dir, demo, out, ["_vg", "_vg_gaps"])  # freeplay: gap open and closed
    plots_of(source_dir, plain, out, ["_vg"])  # no freeplay: no gap plot


def check_sweeps(aerosect, source_dir, workdir, cases):
    out = os.path.join(workdir, "plots")
    one = os.path.join(workdir, "demo_sweep.h5")
    two = os.path.join(workdir, "demo_sweep2.h5")
    plain = os.path.join(workdir, "plain_sweep.h5")
    run_cli(aerosect, "sweep", cases["demo"], "-o", one, "--vary", "flow.airspeed=40:100:7",
            "--jobs", "2")
    run_cli(aerosect, "sweep", cases["demo"], "-o", two, "--vary", "flow.airspeed=40:100:4",
            "--vary", "springs.flap.total_gap_deg=0.5:2:3", "--jobs", "2")
    run_cli(aerosect, "sweep", cases["plain"], "-o", plain, "--vary", "flow.airspeed=80:100:3",
            "--jobs", "2")
    for path in (one, two, plain):
        plots_of(source_dir, path, out, ["_bifurcation"])


def check_gust_sweep(aerosect, source_dir, workdir, cases):
    out = os.path.join(workdir, "plots")
    fixed = os.path.join(workdir, "demo_gust.h5")
    sized = os.path.join(workdir, "regulation_gust.h5")
    run_cli(aerosect, "gust", cases["demo"], "-o", fixed, "--gradients", "9.144:106.68:5")
    run_cli(aerosect, "gust", cases["regulation"], "-o", sized, "--gradients", "9.144:106.68:5")
    constant = plots_of(source_dir, fixed, out, ["_gust_peaks"])["_gust_peaks"]
    varying = plots_of(source_dir, sized, out, ["_gust_peaks"])["_gust_peaks"]
    # U_ds varies with H only when the gust is sized by CS-25.341(a): that
    # file gets the U_ds panel, 1.6 in = 192 px taller.
    assert varying[1] - constant[1] == round(1.6 * DPI), \
        f"U_ds panel adds {varying[1] - constant[1]} px, expected 192"


def check_gust_refuses_empty(aerosect, source_dir, workdir, cases):
    import h5py
    import numpy as np

    # A gust-sweep file without peaks: exit 2 with a message, nothing printed.
    path = os.path.join(workdir, "empty_gust.h5")
    with h5py.File(path, "w") as f:
        f.attrs["aerosect_file_kind"] = np.bytes_("gust-sweep")
        f.create_dataset("gradient", data=np.array([10.0, 20.0]))
    result = run_plot(source_dir, path, os.path.join(workdir, "empty_plots"))
    assert result.returncode == 2, f"exit {result.returncode}: {result.stderr}"
    assert "peaks" in result.stderr, f"message: {result.stderr!r}"
    assert not result.stdout.strip(), f"printed {result.stdout!r}"


def main(argv):
    parser = argparse.ArgumentParser()
    parser.add_argument("aerosect")
    parser.add_argument("source_dir")
    parser.add_argument("--keep", help="write the files and plots here and keep them")
    args = parser.parse_args(argv)

    checks = Checks()
    with tempfile.TemporaryDirectory(prefix="aerosect_plot_") as tmp:
        workdir = args.keep or tmp
        os.makedirs(workdir, exist_ok=True)
        cases = case_variants(args.source_dir, workdir)
        for name, function in (
                ("simulation: time history (gust panel only with gusts) and phase portraits",
                 check_simulation),
                ("flutter: V-g/V-f, gap plot only with freeplay", check_flutter),
                ("sweep: bifurcation diagrams, one and two keys, with and without freeplay",
                 check_sweeps),
                ("gust-sweep: peaks against H, U_ds panel only when it varies",
                 check_gust_sweep),
                ("gust-sweep file without peaks exits 2", check_gust_refuses_empty)):
            checks.run(name, function, args.aerosect, args.source_dir, workdir, cases)
    return checks.summary()


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))

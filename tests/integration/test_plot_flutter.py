#!/usr/bin/python3
"""tools/plot on flutter files.

    test_plot_flutter.py SOURCE_DIR [--keep DIR]

Builds small synthetic flutter files with h5py, laid out as the flutter
command writes them (root attribute aerosect_file_kind = "flutter", axes
/speed and /mode, groups /<linearisation>/<method>/ with (speed, mode)
tables and flutter/divergence attributes), runs SOURCE_DIR/tools/plot on
them and checks the PNG files it writes. With --keep, the files and plots
are left in DIR to be looked at.
Prints one line per check and a last line "N passed, M failed"; exits 1
when a check failed.
"""

import argparse
import math
import os
import struct
import subprocess
import sys
import tempfile
import traceback

import numpy as np


class Checks:
    def __init__(self):
        self.passed = self.failed = 0

    def run(self, name, function, *args):
        try:
            function(*args)
        except Exception as e:  # every failure is reported, the others still run
            self.failed += 1
            print(f"FAIL {name}: {e}")
            traceback.print_exc(limit=2)
        else:
            self.passed += 1
            print(f"PASS {name}")

    def summary(self):
        print(f"{self.passed} passed, {self.failed} failed")
        return 1 if self.failed else 0


# --- synthetic flutter files ------------------------------------------------

REFERENCE_SPEED = 25.0  # b omega_alpha, m s-1
MODE_NAMES = "plunge,pitch,flap"


def text(value):
    # Fixed-length strings, the form the HDF5 writers give text attributes.
    return np.bytes_(value)


def mode_tables(speed, flutter_speed, scale=1.0):
    """(damping, frequency [Hz]) over (speed, mode) for three invented
    modes: the pitch mode's damping crosses zero at flutter_speed."""
    u = speed[:, None]
    damping = np.hstack([
        0.02 + 0.25 * (1 - np.exp(-u / 60.0)),
        0.3 * u * (flutter_speed - u) / flutter_speed ** 2,
        0.01 + 0.0015 * u,
    ]) * scale
    frequency = np.hstack([
        3.0 + 1.5 * (u / speed.max()) ** 2,
        8.0 - 3.0 * (u / speed.max()) ** 2,
        15.0 + 0.01 * u,
    ])
    return np.clip(damping, -0.99, 0.99), frequency


def write_method(group, speed, flutter_speed, divergence_speed, scale=1.0):
    damping, frequency = mode_tables(speed, flutter_speed, scale)
    omega = 2 * math.pi * frequency
    tables = {
        "frequency": (frequency, "Hz", "modal frequency"),
        "damping_ratio": (damping, "1", "modal damping ratio"),
        "eigenvalue_real": (-damping * omega, "s-1", "real part of the eigenvalue"),
        "eigenvalue_imag": (omega * np.sqrt(1 - damping ** 2), "s-1",
                            "imaginary part of the eigenvalue"),
        "reduced_frequency": (omega * 0.5 / speed[:, None], "1", "reduced frequency"),
    }
    for name, (values, units, long_name) in tables.items():
        d = group.create_dataset(name, data=values)
        d.attrs["units"] = text(units)
        d.attrs["long_name"] = text(long_name)
        d.dims[0].attach_scale(group.file["speed"])
        d.dims[1].attach_scale(group.file["mode"])
    in_range = flutter_speed <= speed.max()
    group.attrs["flutter_found"] = np.int64(1 if in_range else 0)
    group.attrs["flutter_speed"] = flutter_speed if in_range else math.nan
    k = int(np.argmin(np.abs(speed - flutter_speed)))
    group.attrs["flutter_frequency"] = frequency[k, 1] if in_range else math.nan
    group.attrs["flutter_mode"] = np.int64(2 if in_range else 0)
    found = divergence_speed is not None and divergence_speed <= speed.max()
    group.attrs["divergence_found"] = np.int64(1 if found else 0)
    group.attrs["divergence_speed"] = divergence_speed if found else math.nan


def make_flutter_file(path, gaps=True, pk=True, dive_speed_eas=70.0, clearance=True,
                      flutter_speed=85.0, divergence_speed=118.0):
    import h5py

    speed = np.linspace(2.0, 130.0, 65)
    density = 1.0
    with h5py.File(path, "w") as f:
        f.attrs["Conventions"] = text("CF-1.8")
        f.attrs["title"] = text("synthetic flutter file for the plot tests")
        f.attrs["aerosect_file_kind"] = text("flutter")
        f.attrs["caution"] = text("Invented numbers, for testing the plots only.")
        f.attrs["sign_conventions"] = text("plunge positive down; pitch positive nose up")
        f.attrs["reference_speed"] = REFERENCE_SPEED
        f.attrs["reference_frequency"] = 50.0
        f.attrs["density"] = density
        if dive_speed_eas is not None:
            f.attrs["dive_speed_eas"] = dive_speed_eas
            if clearance:
                f.attrs["clearance_speed_tas"] = 1.15 * dive_speed_eas * math.sqrt(1.225 / density)
        p = f.create_group("parameters/si")
        d = p.create_dataset("semichord", data=0.5)
        d.attrs["units"] = text("m")
        d.attrs["long_name"] = text("semichord")

        s = f.create_dataset("speed", data=speed)
        s.attrs["units"] = text("m s-1")
        s.attrs["long_name"] = text("true airspeed")
        s.make_scale("speed")
        m = f.create_dataset("mode", data=np.arange(1, 4, dtype=np.int32))
        m.attrs["units"] = text("1")
        m.attrs["long_name"] = text("mode number")
        m.attrs["mode_names"] = text(MODE_NAMES)
        m.make_scale("mode")
        r = f.create_dataset("reduced_speed", data=speed / REFERENCE_SPEED)
        r.attrs["units"] = text("1")
        r.attrs["long_name"] = text("reduced speed U / (b omega_alpha)")
        r.dims[0].attach_scale(s)

        write_method(f.create_group("nominal/state_space"), speed, flutter_speed,
                     divergence_speed)
        if pk:
            write_method(f.create_group("nominal/pk"), speed, flutter_speed * 1.01,
                         divergence_speed, scale=0.95)
        if gaps:
            write_method(f.create_group("gap_closed/state_space"), speed, flutter_speed,
                         divergence_speed)
            write_method(f.create_group("gap_open/state_space"), speed, 0.65 * flutter_speed,
                         None)
    return path


# --- checks -----------------------------------------------------------------

def png_size(path):
    with open(path, "rb") as fh:
        head = fh.read(24)
    # PNG specification §5.2 signature, §11.2.2 IHDR: width, height at 16..24.
    assert head[:8] == b"\x89PNG\r\n\x1a\n", f"{path} is not a PNG file"
    return struct.unpack(">II", head[16:24])


def run_plot(source_dir, path, outdir):
    plot = os.path.join(source_dir, "tools", "plot")
    return subprocess.run([plot, path, "-o", outdir], capture_output=True, text=True,
                          timeout=300)


def check_pngs(source_dir, path, outdir, suffixes):
    result = run_plot(source_dir, path, outdir)
    assert result.returncode == 0, f"tools/plot exit {result.returncode}: {result.stderr}"
    stem = os.path.splitext(os.path.basename(path))[0]
    expected = [os.path.join(outdir, f"{stem}{suffix}.png") for suffix in suffixes]
    written = result.stdout.split()
    assert written == expected, f"wrote {written}, expected {expected}"
    for png in written:
        # Common practice, no source: a plot with axes, lines and text
        # compresses to well over 10 kB; an empty figure to a few kB.
        assert os.path.getsize(png) > 10000, f"{png} is nearly empty"
        width, height = png_size(png)
        # 7.5 in at 120 dpi (the tool's figure width) is 900 px.
        assert 800 <= width <= 1000 and height > 300, f"{png} is {width} x {height}"


def check_full(source_dir, workdir):
    path = make_flutter_file(os.path.join(workdir, "full.h5"))
    check_pngs(source_dir, path, os.path.join(workdir, "plots"), ["_vg", "_vg_gaps"])


def check_nominal_only(source_dir, workdir):
    # No gap groups, no p-k, no dive speed: the V-g/V-f plot only.
    path = make_flutter_file(os.path.join(workdir, "nominal.h5"), gaps=False, pk=False,
                             dive_speed_eas=None)
    check_pngs(source_dir, path, os.path.join(workdir, "plots"), ["_vg"])


def check_nothing_found(source_dir, workdir):
    # Flutter and divergence beyond the sweep (speeds NaN, found 0); the
    # clearance speed derived from dive_speed_eas and density.
    path = make_flutter_file(os.path.join(workdir, "stable.h5"), flutter_speed=400.0,
                             divergence_speed=None, clearance=False)
    check_pngs(source_dir, path, os.path.join(workdir, "plots"), ["_vg", "_vg_gaps"])


def check_refuses_empty(source_dir, workdir):
    import h5py

    # A flutter file without results: exit 2 with a message, nothing written.
    path = os.path.join(workdir, "empty.h5")
    with h5py.File(path, "w") as f:
        f.attrs["aerosect_file_kind"] = text("flutter")
    outdir = os.path.join(workdir, "empty_plots")
    result = run_plot(source_dir, path, outdir)
    assert result.returncode == 2, f"exit {result.returncode}: {result.stderr}"
    assert "speed" in result.stderr, f"message: {result.stderr!r}"
    assert not result.stdout.strip(), f"printed {result.stdout!r}"
    assert not os.path.isdir(outdir) or not os.listdir(outdir), "wrote files"


def main(argv):
    parser = argparse.ArgumentParser()
    parser.add_argument("source_dir")
    parser.add_argument("--keep", help="write the files and plots here and keep them")
    args = parser.parse_args(argv)

    checks = Checks()
    with tempfile.TemporaryDirectory(prefix="aerosect_plot_flutter_") as tmp:
        workdir = args.keep or tmp
        os.makedirs(workdir, exist_ok=True)
        checks.run("flutter file with gaps and 1.15 V_D: _vg and _vg_gaps", check_full,
                   args.source_dir, workdir)
        checks.run("nominal state-space only: _vg", check_nominal_only, args.source_dir,
                   workdir)
        checks.run("nothing found in the sweep", check_nothing_found, args.source_dir,
                   workdir)
        checks.run("flutter file without results exits 2", check_refuses_empty,
                   args.source_dir, workdir)
    return checks.summary()


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))

#!/usr/bin/python3
"""Reads a simulation file written by aerosect with other programs.

    test_readers.py AEROSECT_BINARY SOURCE_DIR [--file FILE.h5]

Runs `AEROSECT_BINARY simulate SOURCE_DIR/cases/demo_aileron.toml -o OUT.h5`
(with --file, checks FILE.h5 instead: used to check the checks), then:
  - h5py: every dataset has units and long_name; /time is a dimension scale
    attached to dimension 0 of every time series (HDF5 dimension-scale spec,
    as exposed by h5py's Dataset.dims);
  - ncdump -h: the file opens as netCDF-4 and every time series is a
    variable over the `time` dimension (netCDF User Guide, netCDF-4/HDF5
    interoperability: dimension scales are netCDF dimensions);
  - xarray with the netcdf4 engine (skipped when not installed): `time` is a
    coordinate of `pitch` (CF conventions 1.8 §5 coordinate variables) and
    the values agree with h5py's;
  - tools/plot: writes non-empty PNG files about 900 px wide, and exits 2
    on files it cannot plot.
Prints one line per check and a last line "N passed, M failed".
"""

import argparse
import os
import re
import shutil
import struct
import subprocess
import sys
import tempfile
import traceback

import numpy as np

CASE = os.path.join("cases", "demo_aileron.toml")


class Skip(Exception):
    pass


class Checks:
    def __init__(self):
        self.passed = self.failed = self.skipped = 0

    def run(self, name, function, *args):
        try:
            function(*args)
        except Skip as e:
            self.skipped += 1
            print(f"SKIP {name}: {e}")
        except Exception as e:  # every failure is reported, the others still run
            self.failed += 1
            print(f"FAIL {name}: {e}")
            traceback.print_exc(limit=2)
        else:
            self.passed += 1
            print(f"PASS {name}")

    def summary(self):
        line = f"{self.passed} passed, {self.failed} failed"
        if self.skipped:
            line += f", {self.skipped} skipped"
        print(line)
        return 1 if self.failed else 0


def text(value):
    if isinstance(value, np.ndarray) and value.shape == ():
        value = value[()]
    if isinstance(value, (bytes, np.bytes_)):
        return value.decode("utf-8").rstrip("\0")
    return str(value)


def all_datasets(f):
    import h5py

    found = []
    f.visititems(lambda name, obj: found.append((name, obj))
                 if isinstance(obj, h5py.Dataset) else None)
    return found


def is_scale(dataset):
    import h5py

    # h5py docs, "Dimension Scales" (low-level h5py.h5ds.is_scale = H5DSis_scale).
    return h5py.h5ds.is_scale(dataset.id)


def time_series(f):
    """Names of the root datasets that run along time (not time itself)."""
    import h5py

    n = f["time"].shape[0]
    return [name for name, d in f.items()
            if name != "time" and isinstance(d, h5py.Dataset) and len(d.shape) >= 1
            and not is_scale(d) and d.shape[0] == n]


# --- h5py -----------------------------------------------------------------

def check_h5py_attributes(path):
    import h5py

    with h5py.File(path, "r") as f:
        # CF conventions 1.8 §2.6.1 (Conventions) and our own file kind.
        assert text(f.attrs["Conventions"]) == "CF-1.8", f.attrs.get("Conventions")
        assert text(f.attrs["aerosect_file_kind"]) == "simulation"
        assert int(f.attrs["complete"]) == 1, "file not marked complete"
        datasets = all_datasets(f)
        assert datasets, "no datasets"
        for name, d in datasets:
            # CF conventions 1.8 §3.1 units, §3.2 long_name.
            for attribute in ("units", "long_name"):
                assert attribute in d.attrs, f"{name} has no {attribute}"
                assert isinstance(text(d.attrs[attribute]), str)
            assert text(d.attrs["long_name"]), f"{name} has an empty long_name"
        # CF conventions 1.10 §4.4: standard_name "time" and axis "T" mark a
        # time coordinate, whose units must be "UNIT since EPOCH"; the file's
        # time is elapsed time in s, and says so instead.
        assert "standard_name" not in f["time"].attrs and "axis" not in f["time"].attrs
        assert text(f["time"].attrs["units"]) == "s"
        assert "not a calendar time" in text(f["time"].attrs["comment"])


def check_h5py_dimension_scales(path):
    import h5py

    with h5py.File(path, "r") as f:
        time = f["time"]
        # h5py docs, "Dimension Scales": Dataset.dims[i] lists the scales
        # attached to dimension i (HDF5 dimension-scale spec, H5DSattach_scale).
        assert is_scale(time), "/time is not a dimension scale"
        series = time_series(f)
        assert "pitch" in series, f"no pitch among {series}"
        for name in series:
            d = f[name]
            scales = list(d.dims[0].keys())
            assert scales == ["time"], f"{name} dims[0] scales: {scales}"
            assert d.dims[0][0] == time, f"{name} dims[0] is not /time"
            for axis in range(1, len(d.shape)):
                assert len(d.dims[axis]) == 1, f"{name} dims[{axis}] has no scale"
                scale = d.dims[axis][0]
                assert scale.shape == (d.shape[axis],), f"{name} dims[{axis}] size"
                assert is_scale(scale), f"{name} dims[{axis}] is not a scale"


# --- ncdump -----------------------------------------------------------------

def check_ncdump(path):
    ncdump = shutil.which("ncdump")
    if ncdump is None:
        raise Skip("ncdump not found (Debian package netcdf-bin)")
    result = subprocess.run([ncdump, "-h", path], capture_output=True, text=True, timeout=120)
    assert result.returncode == 0, f"ncdump -h failed: {result.stderr.strip()}"
    header = result.stdout
    # netCDF-4 reads an unlimited HDF5 dimension scale as an UNLIMITED dimension.
    assert re.search(r"^\s*time = UNLIMITED", header, re.M), "no unlimited time dimension"
    assert re.search(r"^\s*double time\(time\)", header, re.M), "time is not a coordinate"
    import h5py

    with h5py.File(path, "r") as f:
        series = time_series(f)
    for name in series:
        assert re.search(rf"^\s*\w+ {re.escape(name)}\(time\b", header, re.M), \
            f"ncdump does not list {name}(time, ...)"


# --- xarray -----------------------------------------------------------------

def check_xarray(path):
    import importlib.util

    missing = [m for m in ("xarray", "netCDF4") if importlib.util.find_spec(m) is None]
    if missing:
        raise Skip(f"{', '.join(missing)} not installed (Debian python3-xarray, python3-netcdf4)")
    import xarray
    import h5py

    with xarray.open_dataset(path, engine="netcdf4") as ds, h5py.File(path, "r") as f:
        assert "time" in ds.coords, f"coordinates: {list(ds.coords)}"
        pitch = ds["pitch"]
        assert pitch.dims[0] == "time", pitch.dims
        assert "time" in pitch.coords, "time is not a coordinate of pitch"
        assert pitch.attrs["units"] == text(f["pitch"].attrs["units"])
        np.testing.assert_array_equal(ds["time"].values, f["time"][()])
        np.testing.assert_array_equal(pitch.values, f["pitch"][()])
        assert ds.attrs["Conventions"] == "CF-1.8"


# --- tools/plot -------------------------------------------------------------

def png_size(path):
    with open(path, "rb") as fh:
        head = fh.read(24)
    # PNG specification §5.2 signature, §11.2.2 IHDR: width, height at 16..24.
    assert head[:8] == b"\x89PNG\r\n\x1a\n", f"{path} is not a PNG file"
    return struct.unpack(">II", head[16:24])


def check_plot(source_dir, path, workdir):
    plot = os.path.join(source_dir, "tools", "plot")
    outdir = os.path.join(workdir, "plots")
    result = subprocess.run([plot, path, "-o", outdir], capture_output=True, text=True,
                            timeout=300)
    assert result.returncode == 0, f"tools/plot exit {result.returncode}: {result.stderr}"
    written = result.stdout.split()
    stem = os.path.splitext(os.path.basename(path))[0]
    expected = {os.path.join(outdir, f"{stem}_time.png"), os.path.join(outdir, f"{stem}_phase.png")}
    assert set(written) == expected, f"wrote {written}"
    for png in written:
        assert os.path.getsize(png) > 10000, f"{png} is nearly empty"
        width, height = png_size(png)
        assert 800 <= width <= 1000 and height > 200, f"{png} is {width} x {height}"


def check_plot_refuses(source_dir, workdir):
    import h5py

    plot = os.path.join(source_dir, "tools", "plot")
    other = os.path.join(workdir, "other.h5")
    with h5py.File(other, "w") as f:
        f["x"] = np.arange(3.0)
    unknown = os.path.join(workdir, "unknown_kind.h5")
    with h5py.File(unknown, "w") as f:
        f.attrs["aerosect_file_kind"] = np.bytes_("no-such-kind")
    not_hdf5 = os.path.join(workdir, "not_hdf5.h5")
    with open(not_hdf5, "w") as fh:
        fh.write("plain text\n")
    for bad in (other, unknown, not_hdf5):
        result = subprocess.run([plot, bad, "-o", workdir], capture_output=True, text=True,
                                timeout=120)
        assert result.returncode == 2, f"{bad}: exit {result.returncode}"
        assert result.stderr.strip(), f"{bad}: no message"
        assert not result.stdout.strip(), f"{bad}: printed {result.stdout!r}"


# ---------------------------------------------------------------------------

def simulate(binary, source_dir, out):
    case = os.path.join(source_dir, CASE)
    result = subprocess.run([binary, "simulate", case, "-o", out], capture_output=True,
                            text=True, timeout=600)
    assert result.returncode == 0, \
        f"exit {result.returncode}\nstdout: {result.stdout}\nstderr: {result.stderr}"
    assert os.path.isfile(out), f"{out} was not written"


def main(argv):
    parser = argparse.ArgumentParser()
    parser.add_argument("binary")
    parser.add_argument("source_dir")
    parser.add_argument("--file", help="check this file instead of running the binary")
    args = parser.parse_args(argv)

    checks = Checks()
    with tempfile.TemporaryDirectory(prefix="aerosect_readers_") as workdir:
        path = args.file or os.path.join(workdir, "demo_aileron.h5")
        if not args.file:
            checks.run("simulate writes a file", simulate, args.binary, args.source_dir, path)
            if not os.path.isfile(path):
                return checks.summary()
        checks.run("h5py: units and long_name on every dataset", check_h5py_attributes, path)
        checks.run("h5py: time is a dimension scale of every series",
                   check_h5py_dimension_scales, path)
        checks.run("ncdump -h: netCDF-4 variables over time", check_ncdump, path)
        checks.run("xarray: time is a coordinate of pitch", check_xarray, path)
        checks.run("tools/plot writes PNG files", check_plot, args.source_dir, path, workdir)
        checks.run("tools/plot refuses other files", check_plot_refuses, args.source_dir,
                   workdir)
    return checks.summary()


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))

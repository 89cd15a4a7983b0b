#!/usr/bin/python3
"""Resource limits as a shell user meets them, for every command that writes:

- `ulimit -f` (the file size limit) set by bash before it execs aerosect,
  with SIGXFSZ at its default action as a shell leaves it (the test does not
  ignore the signal; a control run of `head` shows the signal is delivered):
  exit 4, one message naming the file, no `.part` file, no complete earlier
  result replaced;
- `ulimit -v` (the address-space limit): a run that needs more memory than
  allowed ends with exit 5 and a message saying so, never a crash;
- a full folder (a 64 KiB tmpfs) and a read-only folder (a tmpfs mounted
  read-only): exit 4 naming the file, nothing half-written. Mounting needs
  privileges; without them these two are skipped with a message.

The closing lines count the runs tried, crashes, hangs and damaged files.
"""
import glob
import os
import shlex
import shutil
import subprocess
import sys
import tempfile
from files import digest

BIN, SRC = os.path.abspath(sys.argv[1]), os.path.abspath(sys.argv[2])
DEMO = os.path.join(SRC, "cases", "demo_aileron.toml")
CRASH_SIGNS = ("terminate called", "Sanitizer", "runtime error:", "internal error", "Segmentation",
               "core dumped", "Aborted", "what():")
passed = failed = 0
tally = {"tried": 0, "crashes": 0, "hangs": 0, "damaged": 0}


def check(name, cond, detail=""):
    global passed, failed
    if cond:
        passed += 1
    else:
        failed += 1
        print(f"FAIL {name}: {detail}")


def shell(limits, args, cwd, timeout=600):
    """Runs aerosect from bash after `ulimit` lines, as a user's shell would."""
    line = "; ".join(limits + ["exec " + " ".join(shlex.quote(a) for a in [BIN, *args])])
    tally["tried"] += 1
    try:
        return subprocess.run(["bash", "-c", line], capture_output=True, text=True, cwd=cwd, timeout=timeout)
    except subprocess.TimeoutExpired:
        tally["hangs"] += 1
        return None


def leftovers(folder):
    return [p for p in glob.glob(os.path.join(folder, "**", "*"), recursive=True)
            if ".part" in os.path.basename(p) or p.endswith(".lock")]


# Light workloads, each writing well over the limits below.
QUICK = {
    "simulate": lambda out: ["simulate", DEMO, "-o", out, "--set", "simulation.duration=2"],
    "flutter": lambda out: ["flutter", DEMO, "-o", out, "--speeds", "5:150:400", "--method", "state-space"],
    "gust": lambda out: ["gust", DEMO, "-o", out, "--gradients", "9.144:106.68:3"],
    "sweep": lambda out: ["sweep", DEMO, "--vary", "flow.airspeed=20:60:6", "--jobs", "2", "-o", out,
                          "--set", "simulation.duration=1"],
    "orbits": lambda out: ["orbits", DEMO, "-o", out, "--points", "6"],
    "study": lambda out: ["study", DEMO, "-o", out, "--sweep-points", "3", "--jobs", "2", "--no-plots",
                          "--set", "simulation.duration=1"],
}


def refused_write(label, r, folder, name_part):
    """exit 4, the file named, no temporary left, no crash."""
    if r is None:
        check(f"{label}: answers", False, "no answer (hang)")
        return
    crashed = r.returncode < 0 or r.returncode > 128 or any(s in r.stderr for s in CRASH_SIGNS)
    tally["crashes"] += crashed
    check(f"{label}: no crash or signal death", not crashed, (r.returncode, r.stderr[-600:]))
    check(f"{label}: exit 4", r.returncode == 4, (r.returncode, r.stderr[-600:]))
    check(f"{label}: names the file", name_part in r.stderr, r.stderr[-600:])
    left = leftovers(folder)
    tally["damaged"] += bool(left)
    check(f"{label}: no .part or lock file left", not left, left)


with tempfile.TemporaryDirectory() as tmp:
    # ------------------------------------------------------------ ulimit -f
    # The control: from this test, a shell's child is killed by SIGXFSZ (the
    # test does not hide the signal).
    ctl = subprocess.run(["bash", "-c", f"ulimit -f 20; exec head -c 100000 /dev/zero > {tmp}/control"])
    check("control: SIGXFSZ reaches a shell's child", ctl.returncode == -25, ctl.returncode)
    for cmd, make in QUICK.items():
        folder = os.path.join(tmp, f"fsize_{cmd}")
        os.mkdir(folder)
        out = os.path.join(folder, "out" if cmd == "study" else "out.h5")
        r = shell(["ulimit -f 20"], make(out), folder)
        refused_write(f"ulimit -f 20: {cmd}", r, folder, "out")
        if r is not None and cmd not in ("sweep", "study"):
            check(f"ulimit -f 20: {cmd}: no output", not os.path.exists(out), os.listdir(folder))

    # An earlier complete result survives a later run that hits the limit.
    folder = os.path.join(tmp, "fsize_keep")
    os.mkdir(folder)
    out = os.path.join(folder, "run.h5")
    r = subprocess.run([BIN, *QUICK["simulate"](out)], capture_output=True, text=True)
    check("earlier simulate", r.returncode == 0, r.stderr)
    before = digest(out)
    r = shell(["ulimit -f 20"], QUICK["simulate"](out), folder)
    refused_write("ulimit -f 20 over a complete run", r, folder, "run")
    same = digest(out) == before
    tally["damaged"] += not same
    check("ulimit -f 20: the complete run untouched", same)

    # ------------------------------------------------------------ ulimit -v
    # A recorded gust of 30 million samples (a small compressed HDF5 file)
    # needs about 500 MB once read; 300 MB of address space is not enough.
    import h5py
    import numpy as np
    big = os.path.join(tmp, "big_gust.h5")
    with h5py.File(big, "w") as f:
        n = 30_000_000
        f.create_dataset("time", data=np.arange(n, dtype="f8") * 1e-4, chunks=(1 << 20,), compression="gzip")
        f.create_dataset("gust_velocity", data=np.zeros(n), chunks=(1 << 20,), compression="gzip")
    case = os.path.join(tmp, "big_gust.toml")
    with open(case, "w") as f:
        f.write(open(DEMO).read())
        f.write(f'\n[[gust]]\nshape = "recorded"\nfile = "{big}"\n')
    # AddressSanitizer reserves terabytes of address space for its shadow
    # memory, so a sanitized program cannot start under `ulimit -v`.
    with open(BIN, "rb") as f:
        sanitized = b"__asan_init" in f.read()
    if sanitized:
        print("SKIP ulimit -v: the program is built with AddressSanitizer")
    for cmd in ("check", "simulate") if not sanitized else ():
        folder = os.path.join(tmp, f"vmem_{cmd}")
        os.mkdir(folder)
        out = os.path.join(folder, "out.h5")
        args = ["check", case] if cmd == "check" else ["simulate", case, "-o", out,
                                                       "--set", "simulation.duration=0.5"]
        r = shell(["ulimit -v 300000"], args, folder)
        label = f"ulimit -v 300000: {cmd}"
        if r is None:
            check(f"{label}: answers", False, "hang")
            continue
        crashed = r.returncode < 0 or r.returncode > 128 or any(s in r.stderr for s in CRASH_SIGNS)
        tally["crashes"] += crashed
        check(f"{label}: no crash", not crashed, (r.returncode, r.stderr[-600:]))
        check(f"{label}: exit 5, out of memory", r.returncode == 5 and "out of memory" in r.stderr,
              (r.returncode, r.stderr[-600:]))
        left = leftovers(folder) + ([out] if os.path.exists(out) else [])
        tally["damaged"] += bool(left)
        check(f"{label}: nothing written", not left, left)

    # ------------------------------------------- full and read-only folders
    mnt = os.path.join(tmp, "mnt")
    os.mkdir(mnt)
    mounted = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=64k", "tmpfs", mnt],
                             capture_output=True, text=True)
    if mounted.returncode != 0:
        print(f"SKIP full and read-only folders: cannot mount a tmpfs here ({mounted.stderr.strip()})")
    else:
        try:
            for cmd, make in QUICK.items():
                folder = os.path.join(mnt, cmd)
                os.mkdir(folder)
                out = os.path.join(folder, "out" if cmd == "study" else "out.h5")
                r = shell([], make(out), folder)
                refused_write(f"full folder: {cmd}", r, folder, "out")
                shutil.rmtree(folder, ignore_errors=True)
            # Read-only: a complete result in it stays as it was.
            keep = os.path.join(mnt, "run.h5")
            with open(keep, "wb") as f:
                f.write(b"an earlier result")
            subprocess.run(["mount", "-o", "remount,ro", mnt], check=True)
            for cmd, make in QUICK.items():
                out = os.path.join(mnt, "ro_out" if cmd == "study" else "ro_out.h5")
                r = shell([], make(out), tmp)
                refused_write(f"read-only folder: {cmd}", r, mnt, "ro_out")
            r = shell([], QUICK["simulate"](keep), tmp)
            refused_write("read-only folder over a result", r, mnt, "run")
            same = open(keep, "rb").read() == b"an earlier result"
            tally["damaged"] += not same
            check("read-only folder: the earlier result untouched", same)
        finally:
            subprocess.run(["umount", mnt])

print(f"{tally['tried']} runs tried, {tally['crashes']} crashes, {tally['hangs']} hangs, "
      f"{tally['damaged']} damaged files")
print(f"{passed} passed, {failed} failed")
sys.exit(1 if failed else 0)

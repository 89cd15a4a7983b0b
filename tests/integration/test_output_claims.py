#!/usr/bin/python3
"""One output has one owner, and no run writes over its own input.

Checks, end to end through the program (README, "Outputs"; common practice,
no source):
- `-o` naming a device node or a FIFO: exit 4, a message naming it, the node
  left as it was;
- `-o` naming the command's own case file (simulate, flutter, gust): exit 4,
  the case file unchanged;
- two runs with the same `-o` (simulate), with HDF5's file locking on and
  off (HDF5_USE_FILE_LOCKING=FALSE, as on many cluster file systems): the
  second is refused at once with exit 4 naming the output and the owner's
  lock, the first completes with a file that carries its own case, and no
  lock file is left afterwards;
- a lock file left by a run killed with SIGKILL holds no lock: the next run
  takes it over.
"""
import os
import signal
import stat
import subprocess
import sys
import tempfile
import time

import h5py

BIN, SRC = sys.argv[1], sys.argv[2]
DEMO = os.path.join(SRC, "cases", "demo_aileron.toml")
passed = failed = 0


def check(name, cond, detail=""):
    global passed, failed
    if cond:
        passed += 1
    else:
        failed += 1
        print(f"FAIL {name}: {detail}")


def run(*args, env=None):
    return subprocess.run([BIN, *args], capture_output=True, text=True, timeout=600, env=env)


def digest(path):
    with open(path, "rb") as f:
        return f.read()


def wait_for(path, seconds=60):
    end = time.time() + seconds
    while time.time() < end:
        if os.path.exists(path):
            return True
        time.sleep(0.02)
    return False


with tempfile.TemporaryDirectory() as d:
    case = os.path.join(d, "c.toml")
    with open(DEMO) as f:
        text = f.read()
    with open(case, "w") as f:
        f.write(text)

    # Special files as outputs.
    dev = os.path.join(d, "null_device")
    os.mknod(dev, 0o600 | stat.S_IFCHR, os.makedev(1, 3))
    fifo = os.path.join(d, "pipe.h5")
    os.mkfifo(fifo)
    for node, kind in ((dev, "a character device"), (fifo, "a FIFO")):
        for cmd in (["simulate", case, "-o", node],
                    ["flutter", case, "--speeds", "5:150:20", "--method", "state-space", "-o", node]):
            r = run(*cmd)
            check(f"{cmd[0]} -o {kind}: exit 4", r.returncode == 4, r.stderr)
            check(f"{cmd[0]} -o {kind}: named", node in r.stderr and kind in r.stderr, r.stderr)
        mode = os.stat(node).st_mode
        check(f"{kind} left as it was",
              stat.S_ISCHR(mode) if kind.endswith("device") else stat.S_ISFIFO(mode), oct(mode))

    # The command's own input as its output.
    before = digest(case)
    for cmd in (["simulate", case, "-o", case],
                ["flutter", case, "--speeds", "5:150:20", "--method", "state-space", "-o", case],
                ["gust", case, "--gradients", "9.144:106.68:2", "-o", case]):
        r = run(*cmd)
        check(f"{cmd[0]} -o its own case: exit 4", r.returncode == 4, r.stderr)
        check(f"{cmd[0]} -o its own case: says so", "input of this run" in r.stderr, r.stderr)
    check("the case file is unchanged", digest(case) == before)
    leftovers = [n for n in os.listdir(d) if n.endswith(".lock") or ".part" in n]
    check("no lock or temporary file left by refused runs", not leftovers, leftovers)

    # Two runs, one output.
    other = os.path.join(d, "other.toml")
    with open(other, "w") as f:
        f.write(text.replace('title = "', 'title = "second run: ', 1))
    for locking in ("TRUE", "FALSE"):
        env = dict(os.environ, HDF5_USE_FILE_LOCKING=locking)
        out = os.path.join(d, f"out_{locking}.h5")
        first = subprocess.Popen([BIN, "simulate", case, "-o", out, "--set", "simulation.duration=300"],
                                 stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True, env=env)
        check(f"locking {locking}: the first run holds the lock", wait_for(out + ".lock"))
        t0 = time.time()
        second = run("simulate", other, "-o", out, env=env)
        refused_in = time.time() - t0
        check(f"locking {locking}: the second run is refused with exit 4", second.returncode == 4,
              second.stderr)
        check(f"locking {locking}: the message names the output and the lock",
              out in second.stderr and "another aerosect run" in second.stderr, second.stderr)
        check(f"locking {locking}: refused at once", refused_in < 30, refused_in)
        _, err = first.communicate(timeout=900)
        check(f"locking {locking}: the first run completes", first.returncode == 0, err)
        with h5py.File(out) as f:
            title = f.attrs["title"]
            title = title.decode() if isinstance(title, bytes) else str(title)
        check(f"locking {locking}: the file carries the first run's case", "second run" not in title, title)
        check(f"locking {locking}: no lock file left", not os.path.exists(out + ".lock"))

    # A lock file left by a killed run holds no lock.
    out = os.path.join(d, "killed.h5")
    p = subprocess.Popen([BIN, "simulate", case, "-o", out, "--set", "simulation.duration=600"],
                         stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    check("killed run: lock taken", wait_for(out + ".lock"))
    time.sleep(0.2)
    p.send_signal(signal.SIGKILL)
    p.wait()
    check("killed run: its lock file stays behind", os.path.exists(out + ".lock"))
    r = run("simulate", case, "-o", out, "--set", "simulation.duration=0.5")
    check("the next run takes the stale lock over", r.returncode == 0, r.stderr)
    check("and removes it when done", not os.path.exists(out + ".lock"))

print(f"{passed} passed, {failed} failed")
sys.exit(1 if failed else 0)

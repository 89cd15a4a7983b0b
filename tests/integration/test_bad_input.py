#!/usr/bin/python3
"""Broken input through the program, end to end: every case file under
tests/bad_cases/, a few --set overrides and unreadable paths must be refused
with exit status 2 and a message that names the file, the line (when there is
one), the key (when there is one) and what is allowed, fits one screen and
shows no crash.

The one-screen limits (at most MAX_LINES lines of at most MAX_COLUMNS columns
on stderr) are this project's rule for error messages (common practice, no
source). Each corpus file states on its first line what it breaks, the key the
message must name and the line it must point at ("-" for none):
    # WHAT | key: KEY | line: LINE
Files whose first line cannot hold a TOML comment (binary junk, UTF-16) have
their expectation in SIDECAR below. The message may shorten a long key, so the
key given is matched as a prefix of the one quoted in the message.
"""
import os
import re
import subprocess
import sys
import tempfile

BIN, SRC = os.path.abspath(sys.argv[1]), os.path.abspath(sys.argv[2])
CORPUS = os.path.join(SRC, "tests", "bad_cases")
DEMO = os.path.join(SRC, "cases", "demo_aileron.toml")
MAX_LINES, MAX_COLUMNS = 25, 100
CRASH_SIGNS = ("terminate called", "Sanitizer", "runtime error:", "internal error", "Segmentation",
               "core dumped", "Aborted")

# name -> (what it breaks, key, line)
SIDECAR = {
    "binary_random.bin": ("4 KiB of random bytes", "-", "1"),
    "binary_nuls.bin": ("1 KiB of NUL bytes", "-", "1"),
    "binary_hdf5_signature.bin": ("an HDF5 file's signature and junk (a result file given as the case)", "-", "1"),
    "binary_gzip.bin": ("a gzip header and junk", "-", "1"),
    "syntax_utf16.toml": ("a UTF-16 file (wrong encoding)", "-", "1"),
}
# Files also run through `simulate` (which must refuse them before writing anything).
SIMULATE = ["syntax_missing_equals.toml", "binary_random.bin", "empty.toml", "type_mass_string.toml",
            "unknown_key_typo.toml", "missing_simulation.toml", "range_inertia_impossible.toml",
            "huge_mass.toml", "nan_mass.toml", "conflict_sample_rate_interval.toml",
            "range_turbulence_seed.toml", "huge_gap.toml"]

passed = failed = tried = 0


def check(name, cond, detail=""):
    global passed, failed
    if cond:
        passed += 1
    else:
        failed += 1
        print(f"FAIL {name}: {detail}")


def expectation(path):
    name = os.path.basename(path)
    if name in SIDECAR:
        return SIDECAR[name]
    with open(path, "rb") as f:
        head = re.split(rb"[\r\n]", f.read(4096), maxsplit=1)[0].decode("utf-8", "replace")
    m = re.fullmatch(r"# (.+) \| key: (\S+) \| line: (\S+)", head)
    if not m:
        raise SystemExit(f"{name}: first line is not '# WHAT | key: KEY | line: LINE' "
                         f"(or add it to SIDECAR): {head[:80]!r}")
    return m.groups()


def refused(label, args, cwd, file_shown, key, line, what):
    """Runs the program and checks the refusal; returns its stderr."""
    global tried
    tried += 1
    try:
        r = subprocess.run([BIN, *args], cwd=cwd, capture_output=True, timeout=120)
    except subprocess.TimeoutExpired:
        check(f"{label}: returns", False, f"no answer within 120 s ({what})")
        return ""
    err = r.stderr.decode("utf-8", "replace")
    lines = err.rstrip("\n").split("\n")
    flat = re.sub(r"\n {4}", " ", err)  # wrapped lines joined again, for matching
    check(f"{label}: exit 2", r.returncode == 2, f"exit {r.returncode} ({what})\n{err[:2000]}")
    check(f"{label}: no crash", not any(s in err for s in CRASH_SIGNS), err[:2000])
    check(f"{label}: stdout empty", r.stdout == b"", r.stdout[:300])
    check(f"{label}: names the file", file_shown in flat, err)
    if line != "-":
        check(f"{label}: names line {line}",
              re.search(re.escape(file_shown) + ":" + line + r"(:\d+)?:", flat) is not None, err)
    if key != "-":
        check(f"{label}: names key {key}", f"key '{key}" in flat, err)
    check(f"{label}: says what is allowed", re.search(r"allowed: \S", err) is not None, err)
    check(f"{label}: at most {MAX_LINES} lines", len(lines) <= MAX_LINES, f"{len(lines)} lines")
    wide = [l for l in lines if len(l) > MAX_COLUMNS]
    check(f"{label}: at most {MAX_COLUMNS} columns", not wide,
          f"{len(wide)} wider lines, the first {len(wide[0]) if wide else 0} columns: {wide[:1]}")
    return err


with tempfile.TemporaryDirectory() as tmp:
    # 1. The corpus, through `check` (and a few through `simulate`), run from
    #    the corpus directory so that the message's width is its own, not a
    #    long path's.
    names = sorted(os.listdir(CORPUS))
    check("corpus is there", len(names) >= 100, len(names))
    for name in names:
        what, key, line = expectation(os.path.join(CORPUS, name))
        refused(f"check {name}", ["check", name], CORPUS, name, key, line, what)
    for name in SIMULATE:
        what, key, line = expectation(os.path.join(CORPUS, name))
        out = os.path.join(tmp, "never.h5")
        refused(f"simulate {name}", ["simulate", name, "-o", out], CORPUS, name, key, line, what)
        check(f"simulate {name}: writes nothing", not os.path.exists(out))

    # 2. Command-line overrides of a good case: the message names the --set.
    for text, key in [("novalue", "-"), ("=3", "-"), ("section=3", "section"),
                      ("section.mass=abc", "section.mass"), ("section.mass=nan", "section.mass"),
                      ("section.mass=1e400", "section.mass"), ("section.mass=1e308", "section.mass"),
                      ("section.mass={a=1}", "section.mass"), ("simulation.hold=[", "simulation.hold"),
                      ("flow.airsped=3", "flow.airsped"), ("title.x=1", "title.x"),
                      ("section." + "x" * 3000 + "=1", "section.xxxxxxxx"),
                      ("flow.airspeed=" + "9" * 3000, "flow.airspeed"),
                      ("simulation.sample_interval=0.001", "simulation.sample_interval")]:
        short = text if len(text) < 40 else text[:37] + "..."
        refused(f"--set {short}", ["check", DEMO, "--set", text], tmp, "--set " + text[:20], key, "-",
                "a bad override")

    # 3. Paths that cannot be read as a case file.
    refused("a directory", ["check", "."], CORPUS, ".:", "-", "-", "a directory")
    refused("simulate a directory", ["simulate", ".", "-o", os.path.join(tmp, "d.h5")], CORPUS, ".:",
            "-", "-", "a directory")
    refused("a missing file", ["check", "no_such_case.toml"], tmp, "no_such_case.toml", "-", "-",
            "a missing file")
    refused("a missing directory", ["check", "no/such/dir/case.toml"], tmp, "no/such/dir/case.toml",
            "-", "-", "a missing directory")
    locked = os.path.join(tmp, "locked.toml")
    with open(locked, "w") as f:
        f.write(open(DEMO).read())
    os.chmod(locked, 0)
    if os.geteuid() == 0:
        print("SKIP unreadable file: running as root, which reads any file whatever its permissions")
    else:
        refused("an unreadable file", ["check", "locked.toml"], tmp, "locked.toml", "-", "-",
                "no read permission")

print(f"{tried} bad inputs tried; {passed} checks passed, {failed} failed")
sys.exit(1 if failed else 0)

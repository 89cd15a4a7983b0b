#!/usr/bin/python3
"""End-to-end checks of `aerosect orbits` against references outside it.

1. Hopf normal form (Kuznetsov, Elements of Applied Bifurcation Theory,
   ch. 3, the first Lyapunov coefficient l1 of a Hopf point): near the linear
   flutter speed U_F of the 2-DOF benchmark section (Lee, Price & Wong 1999)
   with a hardening cubic pitch spring, a branch of cycles grows as
   A_pitch^2 = -4 |q_pitch|^2 sigma (U - U_F) / (omega l1), with
   sigma = dRe(lambda)/dU at U_F, q the critical eigenvector (A q = i omega q),
   p the adjoint one (A^T p = -i omega p, conj(p).q = 1) and, for the cubic
   term F(x) = -G k beta x_pitch^3, l1 = Re(conj(p) . C(q, q, conj(q))) / (2 omega),
   C(u, v, w) = -6 k beta G u_p v_p w_p. Computed here with numpy from
   `check --json`'s linear model; the branch's A^2/(U - U_F), extrapolated
   to A -> 0, must agree to 1e-3. Hardening: l1 < 0, stable cycles above U_F.
2. The branch file's layout (h5py) equals the JSON summary.
3. An independent scipy shooting peer (tools/peer_orbit.py: solve_ivp with
   events and scipy.optimize.root) gives the same orbit to 1e-8.
4. SIGINT: exit 130, the orbits found so far kept with complete = 0.

Usage: test_orbits.py AEROSECT SOURCE_DIR
"""
import json
import os
import shutil
import re
import pty
import select
import signal
import subprocess
import sys
import tempfile
import time

import h5py
import numpy as np

EXE, SRC = sys.argv[1], sys.argv[2]
PY = "/usr/bin/python3"
failures = []


def check(cond, what):
    print(("ok   " if cond else "FAIL ") + what)
    if not cond:
        failures.append(what)


def run(args, **kw):
    return subprocess.run([EXE] + args, capture_output=True, text=True, **kw)


BENCH = """title = "2-DOF benchmark section with a cubic pitch spring"
[nondimensional]
mass_ratio = 100.0
elastic_axis = -0.5
cg_offset = 0.25
radius_of_gyration = 0.5
frequency_ratio = 0.2
reduced_speed = 6.0
[springs.pitch]
law = "cubic"
cubic_coefficient = {beta}
[initial]
pitch_deg = 2.0
[simulation]
duration = 3000.0
sample_rate = 1.0
"""

tmp = tempfile.mkdtemp(prefix="aerosect_orbits_")
case = os.path.join(tmp, "cubic.toml")
beta = 3.0
with open(case, "w") as fh:
    fh.write(BENCH.format(beta=beta))


def linear_model(us):
    r = run(["check", case, "--json", "--set", f"nondimensional.reduced_speed={us!r}"], check=True)
    return json.loads(r.stdout)["linear_model"]


def full_matrix(lm):
    A = np.array(lm["A"], dtype=float)
    for s in lm["nonlinear_springs"]:
        G = np.array(s["G"], dtype=float)
        e = np.zeros(A.shape[0])
        e[s["dof"]] = 1.0
        A = A - np.outer(G, e) * s["slopes"][0]
    return A


def growth(us):
    ev = np.linalg.eigvals(full_matrix(linear_model(us)))
    osc = ev[np.abs(ev.imag) > 1e-8]
    return osc.real.max()


# --- 1. Hopf normal form -------------------------------------------------
# U_F by bisection on the largest real part of the oscillatory eigenvalues.
lo, hi = 6.0, 6.6
assert growth(lo) < 0 < growth(hi)
for _ in range(40):
    mid = 0.5 * (lo + hi)
    lo, hi = (mid, hi) if growth(mid) < 0 else (lo, mid)
UF = 0.5 * (lo + hi)
h = 1e-4
sigma = (growth(UF + h) - growth(UF - h)) / (2 * h)
lm = linear_model(UF)
A = full_matrix(lm)
ev, V = np.linalg.eig(A)
i = np.argmax(np.where(ev.imag > 1e-8, ev.real, -np.inf))
omega = ev[i].imag
q = V[:, i]
evT, VT = np.linalg.eig(A.T)
k = np.argmin(np.abs(evT + 1j * omega))
p = VT[:, k]
p = p / np.conj(np.vdot(p, q))  # conj(p) . q = 1 (np.vdot conjugates its first argument)
assert abs(np.vdot(p, q) - 1) < 1e-12
spring = lm["nonlinear_springs"][0]
G = np.array(spring["G"], dtype=float)
kb = spring["polynomial_terms"][1]  # k beta, the coefficient of x^3
j = spring["dof"]
Cqqq = -6.0 * kb * G * q[j] * q[j] * np.conj(q[j])
l1 = np.real(np.vdot(p, Cqqq)) / (2 * omega)
slope_theory = -4.0 * abs(q[j]) ** 2 * sigma / (omega * l1)
print(f"U_F = {UF:.10f}, omega = {omega:.8f}, sigma = {sigma:.6e}, l1 = {l1:.6e}, "
      f"dA^2/dU = {slope_theory:.8e}")
check(l1 < 0, "hardening cubic: first Lyapunov coefficient negative (supercritical)")

out = os.path.join(tmp, "cubic_branch.h5")
r = run(["orbits", case, "-o", out, "--json", "--from", "5.5", "--to", "7.0",
         "--start", "hopf", "--start-amplitude", "0.2", "--points", "8"])
check(r.returncode == 0, f"orbits on the cubic case exits 0 ({r.stderr.strip()[-300:]})")
js = json.loads(r.stdout)
check(abs(js["hopf_parameter"] - UF) < 1e-8 * UF,
      f"Hopf point {js['hopf_parameter']:.10f} equals numpy's {UF:.10f} to 1e-8")
pts = js["points"]
A2 = np.array([pt["amplitude"]["pitch"] ** 2 for pt in pts])
dU = np.array([pt["parameter"] for pt in pts]) - UF
ratio = dU / A2  # (U - U_F)/A^2, linear in A^2 near onset
# Extrapolate to A -> 0 from the two smallest cycles (the O(A^2) term removed).
order = np.argsort(A2)
a, b = order[0], order[1]
ratio0 = ratio[a] - (ratio[b] - ratio[a]) / (A2[b] - A2[a]) * A2[a]
slope_branch = 1.0 / ratio0
print(f"branch: smallest A = {np.sqrt(A2[a]):.3e} rad, dA^2/dU = {slope_branch:.8e}")
check(abs(slope_branch / slope_theory - 1) < 1e-3,
      f"Hopf normal form: dA^2/dU of the branch {slope_branch:.6e} vs Kuznetsov's l1 "
      f"{slope_theory:.6e} (rel. {abs(slope_branch / slope_theory - 1):.2e} < 1e-3)")
check(all(pt["stable"] for pt in pts), "every cycle of the supercritical branch is stable")
check(all(pt["parameter"] > UF for pt in pts), "the supercritical branch lies above U_F")
check(all(pt["trivial_multiplier_error"] < 1e-8 for pt in pts),
      "trivial Floquet multiplier 1 to 1e-8 on every orbit")

# --- 2. File layout equals the JSON ---------------------------------------
with h5py.File(out, "r") as f:
    check(f.attrs["aerosect_file_kind"] == b"orbit_branch" or f.attrs["aerosect_file_kind"] == "orbit_branch",
          "file kind orbit_branch")
    check(int(f.attrs["complete"]) == 1, "complete = 1")
    check(len(f["point"]) == len(pts), "one point per orbit")
    check(np.allclose(f["parameter"][:], [pt["parameter"] for pt in pts], rtol=0, atol=0),
          "parameter dataset equals the JSON")
    check(np.allclose(f["pitch_amplitude"][:], [pt["amplitude"]["pitch"] for pt in pts], rtol=1e-15),
          "pitch_amplitude equals the JSON")
    check(f["multipliers_real"].shape == (len(pts), len(pts[0]["multipliers"])), "multipliers over (point, multiplier)")
    check(f["period"].attrs["units"] in (b"s", "s"), "period in s")

# --- 2b. The text of a nondimensional case speaks its language --------------
# Issue #15 defect 6: frequencies as omega / omega_alpha, no Hz, no m/s; the
# numbers are the JSON's (frequency_hz x 2 pi / omega_alpha, with
# omega_alpha read from `check --json`).
r = run(["orbits", case, "-o", os.path.join(tmp, "text.h5"), "--from", "5.5", "--to", "7.0", "--points", "6"])
check(r.returncode == 0, "orbits text run exits 0")
table = [l.split() for l in r.stdout.splitlines() if re.match(r"^\s+\d\S*\s+\d", l)]
check("w/w_a" in r.stdout and " Hz" not in r.stdout and "m/s" not in r.stdout and "rad/s" not in r.stdout,
      "nondimensional orbits text: w/w_a, no Hz, m/s or rad/s")
rj = run(["orbits", case, "-o", os.path.join(tmp, "text2.h5"), "--from", "5.5", "--to", "7.0", "--points", "6",
          "--json"])
omega_a = 2 * np.pi * json.loads(run(["check", case, "--json"]).stdout)["uncoupled_frequencies_hz"]["pitch"]
jp = json.loads(rj.stdout)["points"]
check(len(table) == len(jp) and all(abs(float(row[2]) - 2 * np.pi * pt["frequency_hz"] / omega_a) <= 1e-5 * float(row[2])
                                    for row, pt in zip(table, jp)),
      "w/w_a column = 2 pi frequency_hz / omega_alpha")
sw = run(["sweep", case, "-o", os.path.join(tmp, "sw.h5"), "--vary", "nondimensional.reduced_speed=6.5:7:2",
          "--direction", "up"])
check(sw.returncode == 0 and "w/w_a" in sw.stdout and "Hz" not in sw.stdout,
      "nondimensional sweep text: w/w_a, no Hz")

# --- 3. scipy shooting peer -------------------------------------------------
us = 6.8
peer = subprocess.run([PY, os.path.join(SRC, "tools", "peer_orbit.py"), EXE, case,
                       "--set", f"nondimensional.reduced_speed={us}", "--duration", "3000"],
                      capture_output=True, text=True)
check(peer.returncode == 0, f"peer_orbit runs ({peer.stderr.strip()[-300:]})")
pj = json.loads(peer.stdout)
r = run(["orbits", case, "-o", os.path.join(tmp, "one.h5"), "--json", "--set",
         f"nondimensional.reduced_speed={us}", "--start", "march", "--points", "2",
         "--from", str(us - 0.5), "--to", str(us + 0.5)])
check(r.returncode == 0, "orbits --start march exits 0")
first = None
for pt in json.loads(r.stdout)["points"]:
    if pt["parameter"] == us:
        first = pt
check(first is not None, "the marched start is at the case's own value")
if first is not None:
    dT = abs(first["period_s"] / pj["period_s"] - 1)
    dA = abs(first["amplitude"]["pitch"] / pj["amplitude"][1] - 1)
    dP = abs(first["amplitude"]["plunge"] / pj["amplitude"][0] - 1)
    print(f"peer: residual {pj['residual']:.2e}; period rel. {dT:.2e}, pitch amplitude rel. {dA:.2e}, "
          f"plunge amplitude rel. {dP:.2e}")
    check(pj["success"] or pj["residual"] < 1e-12, f"scipy.optimize.root converged ({pj['message']}, scaled residual {pj['residual']:.1e})")
    check(dT < 1e-8 and dA < 1e-8 and dP < 1e-8, "orbit equals the scipy shooting peer to 1e-8")

# --- 4. SIGINT keeps the orbits found so far ------------------------------
# stderr on a pseudo-terminal, so the progress line shows; the signal goes
# out once it reports the first orbits (no race with a fast machine: the
# whole branch takes about 135 orbits).
out4 = os.path.join(tmp, "interrupted.h5")
master, slave = pty.openpty()
proc = subprocess.Popen([EXE, "orbits", case, "-o", out4, "--from", "5.5", "--to", "30",
                         "--start", "hopf", "--points", "100000"],
                        stdout=subprocess.PIPE, stderr=slave, text=True)
os.close(slave)
seen = b""
deadline = time.time() + 300
while b"3 orbits" not in seen and time.time() < deadline:
    r_, _, _ = select.select([master], [], [], 1.0)
    if r_:
        try:
            seen += os.read(master, 4096)
        except OSError:
            break
check(b"orbits, parameter" in seen, "progress line on a terminal")
proc.send_signal(signal.SIGINT)
so, _ = proc.communicate(timeout=300)
os.close(master)
check(proc.returncode == 130, f"SIGINT: exit 130 (got {proc.returncode})")
check(os.path.exists(out4), "SIGINT: the partial branch file is written")
if os.path.exists(out4):
    with h5py.File(out4, "r") as f:
        check(int(f.attrs["complete"]) == 0, "SIGINT: complete = 0")
        check(int(f.attrs["points"]) >= 3, f"SIGINT: the orbits found so far are kept ({int(f.attrs['points'])})")

# --- 5. Bad options: exit 2, the option and what is allowed named ---------
for args, key in ((["--key", "flow.no_such_key"], "flow.no_such_key"),
                  (["--start-amplitude", "-1"], "--start-amplitude"),
                  (["--points", "1"], "--points"),
                  (["--from", "3", "--to", "3"], "--from/--to")):
    r = run(["orbits", case, "-o", os.path.join(tmp, "bad.h5")] + args)
    check(r.returncode == 2 and key in r.stderr and "allowed" in r.stderr,
          f"orbits {' '.join(args)}: exit 2 naming {key} ({r.returncode}: {r.stderr.strip()[:160]})")
    check(not os.path.exists(os.path.join(tmp, "bad.h5")), f"orbits {' '.join(args)}: no file written")

print(f"\n{len(failures)} failures")
shutil.rmtree(tmp, ignore_errors=True)
sys.exit(1 if failures else 0)

#!/usr/bin/python3
"""A steady flight condition end to end, against scipy (issue #18 scopes 1-2).

Usage: test_steady.py AEROSECT_BINARY CASE

On the shipped demo case (3-DOF, freeplay aileron) with
`--set steady.incidence_deg=2 --set steady.gravity=9.80665`, run up to
0.45 s (before its gust starts at 0.5 s):

1. `aerosect check --json` exports the first-order model x' = A x + b0 -
   sum G f(x_dof) (`linear_model`, with `steady_input`) and the static
   equilibrium. Independently of the program's solver:
   - the equilibrium state x_e zeroes that right-hand side (numpy, to
     1e-9 of the largest term, round-off of the sums);
   - the springs' regions printed are those bisect gives for x_e.
2. `aerosect simulate` starts at equilibrium + [initial] (README,
   "[initial]") and its time history agrees with scipy's DOP853 at rtol
   1e-11 on the same exported model, with exact switching at the freeplay
   breakpoints (terminal events, the region taken from the crossing's
   direction), to 1e-9 of the motion's range at every sample (the case's
   stepper "auto" propagates exactly here; DOP853 at rtol 1e-11 over the
   two switches, with room: 1e-11 of the range was seen).
3. The file records the equilibrium (`/parameters/equilibrium/*`, root
   attribute `initial_conditions`), and the first sample is x_e + [initial].
4. Without the steady condition the check JSON has no `steady_input` and
   its `equilibrium.steady_condition` is null (files unchanged: the
   regression baselines check the numbers).
"""
import bisect
import json
import os
import subprocess
import sys
import tempfile

import h5py
import numpy as np
from scipy.integrate import solve_ivp

SETS = ["--set", "steady.incidence_deg=2", "--set", "steady.gravity=9.80665",
        "--set", "simulation.duration=0.45"]
failures = []


def check(name, ok, detail=""):
    print(("ok   " if ok else "FAIL ") + name + ("" if ok else f": {detail}"))
    if not ok:
        failures.append(name)


def run(exe, *args):
    return subprocess.run([exe, *args], capture_output=True, text=True, check=True).stdout


def main():
    exe, case = sys.argv[1], sys.argv[2]
    j = json.loads(run(exe, "check", case, "--json", *SETS))
    lm, eq = j["linear_model"], j["equilibrium"]
    A = np.array(lm["A"])
    b0 = np.array(lm["steady_input"])
    springs = lm["nonlinear_springs"]
    n = len(A)

    def rhs_in(regions):
        def f(t, x):
            dx = A @ x + b0
            for s, r in zip(springs, regions):
                q = x[s["dof"]]
                dx = dx - np.array(s["G"]) * (s["slopes"][r] * q + s["intercepts"][r])
            return dx
        return f

    # 1. The equilibrium is a fixed point of the exported model.
    e = eq["equilibria"][0]
    d = e["displacement"]
    q_e = np.array([d["plunge_m"], np.radians(d["pitch_deg"]), np.radians(d["flap_deg"])])
    dq, vel, wag, nw = 3, lm["layout"]["velocity"], lm["layout"]["wagner"], lm["layout"]["n_wagner"]
    # Lag states at the steady downwash: the state x_e comes from the
    # initial state minus the perturbation (both exported).
    x0 = np.array(lm["initial_state"])
    regions_e = [bisect.bisect_right(s["breakpoints"], q_e[s["dof"]]) for s in springs]
    check("regions printed are bisect's at the equilibrium",
          [e["springs"][s["dof"]]["region"] for s in springs] == regions_e, (e["springs"], regions_e))
    # Solve the lag states at rest for q_e: y_i' = 0 rows of A x + b0 (linear in y).
    x_e = np.zeros(n)
    x_e[:dq] = q_e
    rows = list(range(wag, wag + nw))
    if rows:
        Ay = A[np.ix_(rows, rows)]
        rest = A[rows, :] @ x_e + b0[rows]
        x_e[rows] = np.linalg.solve(Ay, -rest)
    f_e = rhs_in(regions_e)(0.0, x_e)
    scale = np.abs(A).max() * np.abs(x_e).max() + np.abs(b0).max()
    check("equilibrium zeroes the exported right-hand side", np.abs(f_e).max() <= 1e-9 * scale,
          (np.abs(f_e).max(), scale))

    # 2. simulate against DOP853 on the exported model.
    with tempfile.TemporaryDirectory() as tmp:
        out = os.path.join(tmp, "run.h5")
        run(exe, "simulate", case, "-o", out, *SETS)
        with h5py.File(out) as h:
            t = h["time"][:]
            hist = np.stack([h["plunge"][:], h["pitch"][:], h["flap"][:]], axis=1)
            attrs = dict(h.attrs)
            peq = {k: h["parameters/equilibrium"][k][()] for k in h["parameters/equilibrium"]}
    check("time history starts at the exported initial state", np.allclose(hist[0], x0[:dq], rtol=0, atol=1e-15),
          (hist[0], x0[:dq]))
    pert = x0[:dq] - q_e
    check("the start is the equilibrium plus [initial] (pitch 1 deg, flap 2 deg)",
          np.allclose(pert, [0, np.radians(1.0), np.radians(2.0)], rtol=0, atol=1e-12), pert)
    check("file records the equilibrium",
          all(abs(peq[k] - v) <= 1e-15 * max(1, abs(v)) for k, v in
              (("plunge", q_e[0]), ("pitch", q_e[1]), ("flap", q_e[2]))), peq)
    check("file says [initial] is a perturbation about the equilibrium",
          "perturbation about the static equilibrium" in str(attrs.get("initial_conditions")), attrs.get("initial_conditions"))

    # DOP853 with exact switching.
    ts, xs, tt = [], [], 0.0
    x = x0.copy()
    regions = [bisect.bisect_right(s["breakpoints"], x[s["dof"]]) for s in springs]
    switches = 0
    T = t[-1]
    while tt < T:
        events, owners = [], []
        for si, (s, r) in enumerate(zip(springs, regions)):
            for bi in (r - 1, r):
                if 0 <= bi < len(s["breakpoints"]):
                    ev = (lambda tt_, xx, dof=s["dof"], b=s["breakpoints"][bi]: xx[dof] - b)
                    ev.terminal = True
                    ev.direction = -1 if bi == r - 1 else 1
                    events.append(ev)
                    owners.append((si, -1 if bi == r - 1 else 1))
        sol = solve_ivp(rhs_in(regions), (tt, T), x, method="DOP853", rtol=1e-11, atol=1e-14,
                        events=events, dense_output=True)
        seg_end = sol.t[-1]
        for k, (si, step) in enumerate(owners):
            if sol.status == 1 and len(sol.t_events[k]) and sol.t_events[k][0] == seg_end:
                regions[si] += step
                switches += 1
        mask = (t >= tt) & (t <= seg_end)
        ts.append(t[mask])
        xs.append(sol.sol(t[mask]).T[:, :dq])
        x = sol.y[:, -1]
        tt = seg_end
    ref_t = np.concatenate(ts)
    ref = np.concatenate(xs)
    _, idx = np.unique(ref_t, return_index=True)
    ref = ref[idx]
    rng = hist.max(axis=0) - hist.min(axis=0)
    err = np.abs(hist - ref).max(axis=0)
    check(f"simulate equals DOP853 on the exported model ({switches} switches)",
          ref.shape == hist.shape and switches >= 2 and np.all(err <= 1e-9 * rng), (err, rng, switches))
    print(f"     largest differences {err} against ranges {rng}")

    # 4. Without the condition.
    j0 = json.loads(run(exe, "check", case, "--json"))
    check("no steady condition: no steady_input, steady_condition null",
          "steady_input" not in j0["linear_model"] and j0["equilibrium"]["steady_condition"] is None
          and j0["equilibrium"]["initial_conditions"] == "absolute")

    # Flutter JSON: the nominal linearisation is about the equilibrium.
    with tempfile.TemporaryDirectory() as tmp:
        fj = json.loads(run(exe, "flutter", case, "--json", "-o", os.path.join(tmp, "f.h5"), *SETS))
    # The dual-input describing function (bias plus sinusoid): every point
    # carries its bias, and the omission note is null.
    lco = fj["lco_prediction"]
    check("flutter: nominal about the equilibrium, dual-input describing-function prediction",
          "static equilibrium" in fj["nominal_linearisation"] and lco is not None and lco["biased"]
          and fj["lco_prediction_omitted"] is None and lco["points"]
          and all("bias" in p and "mean_spring_force" in p for p in lco["points"])
          and fj["equilibrium"]["equilibria"][0]["springs"][2]["in_contact"])

    print("FAILED: " + ", ".join(failures) if failures else "all steady-condition checks passed")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())

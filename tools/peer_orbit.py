#!/usr/bin/python3
"""Independent scipy shooting peer for aerosect's periodic orbits.

Reads the first-order model that `aerosect check CASE --json` prints (key
`linear_model`, the same input as tools/peer_solve_ivp.py, whose Peer class
gives the right-hand side in a stored spring region) and finds the limit
cycle by shooting with scipy alone:

  flow      scipy.integrate.solve_ivp(DOP853) with terminal events at the
            breakpoints of the active regions (the integration restarts in
            the next region there) and a non-terminal event on the watched
            DOF's velocity (its maxima);
  seed      the case marched in time from its initial state for --duration
            seconds; the state at the last maximum of the watched DOF and the
            time between the last maxima (--peaks maxima per period);
  shooting  scipy.optimize.root(method="hybr") on
            [phi_T(x0) - x0, x0[velocity of the watched DOF]] over (x0, T),
            its Jacobian by scipy's own finite differences.
The orbit's figures: period, the state on the section, per-DOF max/min
(the watched DOF's maxima and minima found by the velocity events).

Usage:
  peer_orbit.py AEROSECT CASE [--set KEY=VALUE ...] [--rtol R] [--atol A]
                [--duration S] [--peaks P]
Prints one JSON object.
"""
import argparse
import bisect
import json
import os
import sys

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import root

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from peer_solve_ivp import Peer, load_model  # noqa: E402


def flow(peer, x0, T, rtol, atol, extrema=False):
    """x(T) from x0, switching exactly; with extrema, every velocity zero of
    every DOF as (dof, t, value)."""
    n_dof = peer.layout["velocity"]
    vel = peer.layout["velocity"]
    x = np.array(x0, dtype=float)
    regions = [bisect.bisect_right(s["bp"], x[s["dof"]]) for s in peer.springs]
    t = 0.0
    found = []
    while t < T:
        events, owners = [], []
        if extrema:
            for d in range(n_dof):
                ev = (lambda d: lambda tt, xx: xx[vel + d])(d)
                ev.terminal, ev.direction = False, 0
                events.append(ev)
        first_bp = len(events)
        for si, (s, r) in enumerate(zip(peer.springs, regions)):
            dof = s["dof"]
            if r > 0:
                b = s["bp"][r - 1]
                ev = (lambda b, dof: lambda tt, xx: xx[dof] - b)(b, dof)
                ev.terminal, ev.direction = True, -1
                events.append(ev)
                owners.append((si, r - 1, -1))
            if r < len(s["bp"]):
                b = s["bp"][r]
                ev = (lambda b, dof: lambda tt, xx: xx[dof] - b)(b, dof)
                ev.terminal, ev.direction = True, +1
                events.append(ev)
                owners.append((si, r, +1))
        sol = solve_ivp(peer.rhs_factory(regions), (t, T), x, method="DOP853", rtol=rtol,
                        atol=atol, events=events or None)
        if sol.status < 0:
            raise RuntimeError(sol.message)
        if extrema:
            for d in range(n_dof):
                for te, ye in zip(sol.t_events[d], sol.y_events[d]):
                    if t < te < T:
                        found.append((d, te, ye[d]))
        if sol.status == 1:
            hits = [(sol.t_events[first_bp + i][0], i) for i in range(len(owners))
                    if len(sol.t_events[first_bp + i])]
            te, i = min(hits)
            si, bi, d = owners[i]
            x = sol.y_events[first_bp + i][0].copy()
            x[peer.springs[si]["dof"]] = peer.springs[si]["bp"][bi]
            regions[si] = bi + 1 if d > 0 else bi
            t = te
        else:
            x = sol.y[:, -1].copy()
            t = T
    return x, found


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("aerosect")
    ap.add_argument("case")
    ap.add_argument("--set", action="append", default=[], metavar="KEY=VALUE")
    ap.add_argument("--rtol", type=float, default=1e-12)
    ap.add_argument("--atol", type=float, default=1e-15)
    ap.add_argument("--duration", type=float, default=None, help="seconds of the seed run")
    ap.add_argument("--peaks", type=int, default=1, help="maxima of the watched DOF per period")
    a = ap.parse_args(argv)
    lm = load_model(a.aerosect, a.case, a.set)
    peer = Peer(lm)
    vel = peer.layout["velocity"]
    n_dof = vel
    w = peer.watch
    T_run = peer.duration if a.duration is None else a.duration
    # Seed: march in time (looser tolerance: only a start for Newton).
    xe, ext = flow(peer, peer.x0, T_run, 1e-10, 1e-13, extrema=True)
    maxima = []
    for d, te, v in ext:
        if d != w:
            continue
        maxima.append(te)
    # The state at the last maximum: re-integrate up to it.
    if len(maxima) < a.peaks + 2:
        sys.exit("peer_orbit: the seed run has too few maxima")
    # Maxima only (velocity zeros alternate max/min; keep those with the
    # larger value of each neighbouring pair).
    vals = [(te, v) for d, te, v in ext if d == w]
    mx = [vals[i] for i in range(1, len(vals) - 1)
          if vals[i][1] >= vals[i - 1][1] and vals[i][1] >= vals[i + 1][1]]
    t_last = mx[-1][0]
    T0 = mx[-1][0] - mx[-1 - a.peaks][0]
    x_seed, _ = flow(peer, peer.x0, t_last, 1e-10, 1e-13)
    x_seed[vel + w] = 0.0
    scale = np.maximum(np.abs(x_seed), 1e-6 * np.max(np.abs(x_seed)))

    def F(u):
        x0 = u[:-1] * scale
        T = u[-1] * T0
        xT, _ = flow(peer, x0, T, a.rtol, a.atol)
        r = (xT - x0) / scale
        return np.append(r, x0[vel + w] / scale[vel + w])

    u0 = np.append(x_seed / scale, 1.0)
    sol = root(F, u0, method="hybr", options=dict(xtol=1e-12, eps=1e-7))
    x0 = sol.x[:-1] * scale
    T = sol.x[-1] * T0
    res = float(np.max(np.abs(F(sol.x))))
    _, ext = flow(peer, x0, T, a.rtol, a.atol, extrema=True)
    out = dict(success=bool(sol.success), message=str(sol.message), residual=res,
               period_s=float(T), frequency_hz=float(1.0 / T), state_on_section=[float(v) for v in x0],
               watched_dof=w, rtol=a.rtol, atol=a.atol)
    mx, mn = {}, {}
    for d in range(n_dof):
        vals = [x0[d]] + [v for dd, te, v in ext if dd == d]
        mx[d], mn[d] = max(vals), min(vals)
    out["max"] = [float(mx[d]) for d in range(n_dof)]
    out["min"] = [float(mn[d]) for d in range(n_dof)]
    out["amplitude"] = [float(0.5 * (mx[d] - mn[d])) for d in range(n_dof)]
    print(json.dumps(out, indent=1))


if __name__ == "__main__":
    main()

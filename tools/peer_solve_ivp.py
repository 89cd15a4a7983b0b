#!/usr/bin/python3
"""Independent peer integration of an aerosect case with scipy's DOP853.

Reads the assembled first-order model that `aerosect check CASE --json`
prints (key `linear_model`) and integrates

    x' = A x [+ b0] - sum_springs G * f(x[dof]),
    f  = slopes[r] * x + intercepts[r] + sum_k polynomial_terms[k] * x^(k+2)

in the region r = bisect_right(breakpoints, x[dof]) of each spring, with
scipy.integrate.solve_ivp(method="DOP853", or "RK45" with --method). Switching is exact: a terminal
event on x[dof] - breakpoint stops the integration, the region is updated
from the crossing direction and the integration restarts there (the
right-hand side always uses the stored region, never a test on x). True
peaks of the watched DOF (the first spring's DOF, else pitch) come from
non-terminal events on its velocity.

The LCO figure is taken over the last fifth of the run (or over the last
`--cycles` cycles): half peak-to-peak (largest maximum - smallest minimum)/2,
plus the half difference of the mean maxima and mean minima and the last
complete cycle's (max - preceding min)/2.

With --cycle-samples N the last LCO period of the run, T = 1/frequency
ending at the end time, is sampled at N equally spaced instants of the
dense output and its content is given per DOF from numpy's FFT (rfft):
mean, RMS about zero and about the mean, harmonic amplitudes
a_k = 2|X_k|/N (k = 1..5) and THD = sqrt(sum_{k=2}^{N/2} a_k^2)/a_1 over the
whole one-sided spectrum (the Nyquist bin with weight sqrt(2)|X_{N/2}|/N).

Usage:
  peer_solve_ivp.py AEROSECT CASE [--set KEY=VALUE ...] [--rtol R] [--atol A]
                    [--method DOP853|RK45] [--duration SECONDS] [--cycles N] [--cycle-samples N]
Prints one JSON object.
"""
import argparse
import bisect
import json
import subprocess
import sys
import time

import numpy as np
from scipy.integrate import solve_ivp


def load_model(exe, case, sets):
    cmd = [exe, "check", case, "--json"]
    for s in sets:
        cmd += ["--set", s]
    out = subprocess.run(cmd, capture_output=True, text=True, check=True).stdout
    return json.loads(out)["linear_model"]


class Peer:
    def __init__(self, lm):
        self.A = np.array(lm["A"], dtype=float)
        self.layout = lm["layout"]
        self.springs = []
        for s in lm["nonlinear_springs"]:
            self.springs.append(dict(
                dof=int(s["dof"]),
                G=np.array(s["G"], dtype=float),
                bp=[float(b) for b in s["breakpoints"]],
                slopes=[float(v) for v in s["slopes"]],
                intercepts=[float(v) for v in s["intercepts"]],
                poly=[float(v) for v in s.get("polynomial_terms", [])]))
        # b0: the constant of a steady flight condition (key steady_input,
        # present only when the case has one).
        self.b0 = np.array(lm["steady_input"], dtype=float) if "steady_input" in lm else None
        self.x0 = np.array(lm["initial_state"], dtype=float)
        self.duration = float(lm["duration_s"])
        self.watch = self.springs[0]["dof"] if self.springs else 1
        self.nfev = 0
        self.nsteps = 0
        self.switches = 0
        self.tail = []  # (t0, t1, dense output) of the segments in the last tenth

    def rhs_factory(self, regions):
        A, springs, b0 = self.A, self.springs, self.b0
        terms = [(s["dof"], s["G"], s["slopes"][r], s["intercepts"][r], s["poly"])
                 for s, r in zip(springs, regions)]

        def rhs(t, x):
            dx = A @ x
            if b0 is not None:
                dx = dx + b0
            for dof, G, k, c, poly in terms:
                q = x[dof]
                f = k * q + c
                for i, p in enumerate(poly):
                    f += p * q ** (i + 2)
                dx -= G * f
            return dx
        return rhs

    def run(self, rtol, atol, duration=None, keep_tail=False, method="DOP853"):
        T = self.duration if duration is None else duration
        self.keep_tail = keep_tail
        vel = self.layout["velocity"]
        w = self.watch
        x = self.x0.copy()
        regions = [bisect.bisect_right(s["bp"], x[s["dof"]]) for s in self.springs]
        t = 0.0
        peaks = []  # (t, x[watch], +1 max / -1 min)

        def peak_event(tt, xx):
            return xx[vel + w]
        peak_event.terminal = False
        peak_event.direction = 0

        while t < T:
            events = [peak_event]
            owners = []  # (spring index, breakpoint index, direction)
            for si, (s, r) in enumerate(zip(self.springs, regions)):
                dof = s["dof"]
                if r > 0:  # lower breakpoint, crossed going down
                    b = s["bp"][r - 1]
                    ev = (lambda b, dof: lambda tt, xx: xx[dof] - b)(b, dof)
                    ev.terminal, ev.direction = True, -1
                    events.append(ev)
                    owners.append((si, r - 1, -1))
                if r < len(s["bp"]):  # upper breakpoint, crossed going up
                    b = s["bp"][r]
                    ev = (lambda b, dof: lambda tt, xx: xx[dof] - b)(b, dof)
                    ev.terminal, ev.direction = True, +1
                    events.append(ev)
                    owners.append((si, r, +1))
            sol = solve_ivp(self.rhs_factory(regions), (t, T), x, method=method,
                            rtol=rtol, atol=atol, events=events, dense_output=True)
            if sol.status < 0:
                raise RuntimeError(sol.message)
            self.nfev += sol.nfev
            self.nsteps += len(sol.t) - 1
            if self.keep_tail and sol.t[-1] >= 0.9 * T and sol.sol is not None:
                self.tail.append((sol.t[0], sol.t[-1], sol.sol))
            # Peaks of the watched DOF in this segment.
            for te, ye in zip(sol.t_events[0], sol.y_events[0]):
                if te <= t:
                    continue
                acc = self.rhs_factory(regions)(te, ye)[vel + w]
                peaks.append((te, ye[w], -1 if acc > 0 else +1))
            if sol.status == 1:  # a breakpoint was crossed
                hits = [(sol.t_events[i + 1][0], i) for i in range(len(owners))
                        if len(sol.t_events[i + 1])]
                te, i = min(hits)
                si, bi, d = owners[i]
                x = sol.y_events[i + 1][0].copy()
                x[self.springs[si]["dof"]] = self.springs[si]["bp"][bi]  # on the breakpoint
                regions[si] = bi + 1 if d > 0 else bi
                t = te
                self.switches += 1
            else:
                x = sol.y[:, -1].copy()
                t = sol.t[-1]
                break
        return peaks, T

    def cycle(self, period, T, samples, harmonics=5):
        """Content of the last period of the run from numpy's FFT."""
        n_dof = self.layout["velocity"]
        ts = T - period + period * np.arange(samples) / samples
        x = np.empty((n_dof, samples))
        for m, t in enumerate(ts):
            seg = next(s for s in self.tail if s[0] <= t <= s[1])
            x[:, m] = seg[2](t)[:n_dof]
        out = []
        for d in range(n_dof):
            X = np.fft.rfft(x[d])
            a = 2.0 * np.abs(X) / samples
            a[samples // 2] = np.sqrt(2.0) * np.abs(X[samples // 2]) / samples
            out.append(dict(mean=float(X[0].real / samples),
                            rms=float(np.sqrt(np.mean(x[d] ** 2))),
                            rms_about_mean=float(np.std(x[d])),
                            harmonics=[float(v) for v in a[1:harmonics + 1]],
                            thd=float(np.sqrt(np.sum(a[2:] ** 2)) / a[1])))
        return dict(samples=samples, period_s=period, dof=out)

    @staticmethod
    def lco(peaks, T, cycles=None):
        """LCO figures of the watched DOF from its true peaks."""
        if cycles is None:
            sel = [p for p in peaks if p[0] >= 0.8 * T]
        else:
            # the last `cycles` complete cycles (maximum to maximum)
            imax = [i for i, p in enumerate(peaks) if p[2] > 0]
            start = imax[-cycles - 1] if len(imax) > cycles else 0
            sel = peaks[start:imax[-1] + 1] if imax else []
        mx = [p for p in sel if p[2] > 0]
        mn = [p for p in sel if p[2] < 0]
        out = dict(n_maxima=len(mx), n_minima=len(mn))
        if not mx or not mn:
            out.update(amplitude=0.0, amplitude_mean_peaks=0.0, amplitude_last_cycle=0.0,
                       frequency_hz=0.0, max=None, min=None)
            return out
        vmax = max(p[1] for p in mx)
        vmin = min(p[1] for p in mn)
        out["max"], out["min"] = vmax, vmin
        out["amplitude"] = 0.5 * (vmax - vmin)
        out["amplitude_mean_peaks"] = 0.5 * (np.mean([p[1] for p in mx]) -
                                             np.mean([p[1] for p in mn]))
        # Last complete cycle: the last maximum and the minimum before it.
        last = None
        for i in range(len(peaks) - 1, 0, -1):
            if peaks[i][2] > 0 and peaks[i - 1][2] < 0:
                last = 0.5 * (peaks[i][1] - peaks[i - 1][1])
                break
        out["amplitude_last_cycle"] = last
        # Period: maxima to maxima; a cycle with p maxima of different
        # heights per period (p <= 4) is found as the smallest lag p at which
        # the maxima repeat.
        tmax = [p[0] for p in mx]
        hmax = [p[1] for p in mx]
        lag = 1
        for p in range(1, 5):
            if len(hmax) > 2 * p and all(abs(hmax[i] - hmax[i - p]) <= 1e-6 * abs(vmax)
                                         for i in range(p, len(hmax))):
                lag = p
                break
        out["peaks_per_period"] = lag
        out["frequency_hz"] = ((len(tmax) - 1) / (tmax[-1] - tmax[0]) / lag
                               if len(tmax) > 1 else 0.0)
        return out


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("aerosect")
    ap.add_argument("case")
    ap.add_argument("--set", action="append", default=[], metavar="KEY=VALUE")
    ap.add_argument("--rtol", type=float, default=None,
                    help="default: the case's simulation.relative_tolerance")
    ap.add_argument("--atol", type=float, default=None,
                    help="default: the case's simulation.absolute_tolerance")
    ap.add_argument("--method", default="DOP853", choices=["DOP853", "RK45"],
                    help="scipy's integrator (default DOP853; RK45 is Dormand-Prince 5(4))")
    ap.add_argument("--duration", type=float, default=None, help="seconds (default: the case's)")
    ap.add_argument("--cycles", type=int, default=None,
                    help="LCO window: the last N cycles instead of the last fifth of the run")
    ap.add_argument("--cycle-samples", type=int, default=None,
                    help="sample the last LCO period at N points and give its FFT content")
    a = ap.parse_args(argv)
    lm = load_model(a.aerosect, a.case, a.set)
    rtol, atol = a.rtol, a.atol
    if rtol is None or atol is None:
        # The case's own tolerances (the `check` summary does not carry them).
        import tomllib
        with open(a.case, "rb") as fh:
            sim = dict(tomllib.load(fh).get("simulation", {}))
        for s in a.set:
            k, _, v = s.partition("=")
            if k.startswith("simulation."):
                sim[k[len("simulation."):]] = float(v)
        rtol = sim.get("relative_tolerance") if rtol is None else rtol
        atol = sim.get("absolute_tolerance") if atol is None else atol
        if rtol is None or atol is None:
            sys.exit("peer_solve_ivp: give --rtol and --atol (not in the case file)")
    peer = Peer(lm)
    t0 = time.perf_counter()
    peaks, T = peer.run(rtol, atol, a.duration, keep_tail=a.cycle_samples is not None,
                        method=a.method)
    wall = time.perf_counter() - t0
    res = Peer.lco(peaks, T, a.cycles)
    if a.cycle_samples and res["frequency_hz"] > 0:
        res["cycle"] = peer.cycle(1.0 / res["frequency_hz"], T, a.cycle_samples)
    res.update(watched_dof=peer.watch, duration_s=T, rtol=rtol, atol=atol,
               steps=peer.nsteps, nfev=peer.nfev, switches=peer.switches,
               peaks=len(peaks), wall_s=wall, method=a.method)
    print(json.dumps(res, indent=1))



if __name__ == "__main__":
    main()

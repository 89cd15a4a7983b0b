#!/usr/bin/python3
"""End-to-end test of `aerosect study`: the demo case and a case without
freeplay or gusts, the HTML report opened in headless Chromium, and every
number of the report's summary table traced back to the HDF5 files.

    test_study.py AEROSECT SOURCE_DIR [--keep DIR]

Checks:
  - the demo study exits 0 and writes every file it lists (HDF5, JSON,
    PNG, report.html); each HDF5 file opens with h5py;
  - in the browser every image of the report loads and the summary table
    has the rows the issue asks for (flutter, divergence, margin, freeplay
    band, LCO onset / persistence / hysteresis, largest LCO and hinge
    moments inside the envelope, gust peaks);
  - the numbers in the report are the numbers in the files: each row's
    number is recomputed here from the HDF5 file it names (attributes, or
    the sweep table and its rules, or the time history) and must equal the
    one in summary.json to 1e-12, and the cell shown in the browser must be
    that number to its 4 significant digits;
  - a case without freeplay and without gusts runs, and its report says
    the LCO sweep and the gust sweep were skipped and why;
  - the preload rows (the demo, and the trimmed demo at 27 m/s where its
    aileron rests in the gap): the answer recomputed from preload.h5's
    response classes, no LCO at or beyond the hold-off level, and the
    equilibrium rows equal to flutter.h5's /parameters/equilibrium.
Common practice, no source: a report is only as good as its traceability.
"""

import argparse
import datetime
import hashlib
import json
import math
import os
import re
import shutil
import subprocess
import sys
import tempfile

import h5py
import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from browser import check_report  # noqa: E402
from test_plot_flutter import Checks  # noqa: E402

DEG = 180.0 / math.pi


def run_study(exe, case, out, *extra):
    r = subprocess.run([exe, "study", case, "-o", out, "--json", "--jobs", "2", *extra],
                       capture_output=True, text=True)
    if r.returncode != 0:
        raise AssertionError(f"study exited {r.returncode}: {r.stderr[-2000:]}")
    return json.loads(r.stdout)


def rows_by_id(summary):
    return {row["id"]: row for row in summary["summary"]}


def sweep_expectations(path, vd_tas):
    """Onset, persistence and the largest LCO at or below V_D from the sweep
    table, by the rules the report states."""
    with h5py.File(path, "r") as f:
        v = f["flow_airspeed"][:]
        rc = f["response_class"][:]
        watched = f.attrs["watched_dof"]
        watched = watched.decode() if isinstance(watched, bytes) else str(watched)
        amp = {d: f[f"{d}_amplitude"][:] for d in ("plunge", "pitch", "flap") if f"{d}_amplitude" in f}
        fmax, fmin = f["flap_max"][:], f["flap_min"][:]
    out = {}
    up = np.nonzero(rc[0] == 1)[0]
    down = np.nonzero(rc[1] == 1)[0]
    if up.size:
        out["lco_onset_up"] = v[up[0]]
    if down.size:
        out["lco_persists_down"] = v[down[0]]
    best = None
    for d in (0, 1):
        for i in range(len(v)):
            if rc[d, i] == 1 and v[i] <= vd_tas * (1 + 1e-12):
                a = amp[watched][d, i]
                if best is None or a > best[0]:
                    best = (a, d, i)
    if best:
        a, d, i = best
        out["lco_largest"] = a * (DEG if watched != "plunge" else 1)
        for k, arr in amp.items():
            if k != watched:
                out[f"lco_largest_{k}"] = arr[d, i] * (1 if k == "plunge" else DEG)
        out["_flap_extremes"] = (fmax[d, i], fmin[d, i])
        with h5py.File(path, "r") as f:
            scale = DEG if watched != "plunge" else 1
            out["lco_largest_rms"] = f[f"{watched}_rms"][d, i] * scale
            out["lco_largest_thd"] = f[f"{watched}_thd"][d, i] * 100
    return out


def orbit_expectations(path):
    """The largest-LCO rows from the one-orbit file lco_orbit.h5."""
    out = {}
    with h5py.File(path, "r") as f:
        watched = f.attrs["watched_dof"]
        watched = watched.decode() if isinstance(watched, bytes) else str(watched)
        scale = {d: (1 if d == "plunge" else DEG) for d in ("plunge", "pitch", "flap")}
        out["lco_largest"] = f[f"{watched}_amplitude"][0] * scale[watched]
        out["lco_largest_rms"] = f[f"{watched}_rms"][0] * scale[watched]
        out["lco_largest_thd"] = f[f"{watched}_thd"][0] * 100
        out["lco_largest_multiplier"] = f["largest_multiplier_modulus"][0]
        for d in ("plunge", "pitch", "flap"):
            if d != watched and f"{d}_amplitude" in f:
                out[f"lco_largest_{d}"] = f[f"{d}_amplitude"][0] * scale[d]
        out["_flap_extremes"] = (f["flap_max"][0], f["flap_min"][0])
    return out


def fold_expectations(path):
    """lco_fold_<k>: the folds of branch.h5 in file order (an SI case: the
    parameter is the airspeed in m/s)."""
    with h5py.File(path, "r") as f:
        if "bifurcation_kind" not in f:
            return {}
        kinds = f["bifurcation_kind"][:]
        values = f["bifurcation_parameter"][:]
    folds = [v for k, v in zip(kinds, values) if k == 1]
    return {f"lco_fold_{i + 1}": v for i, v in enumerate(folds)}


def branch_amplitude_at(speed, amplitude, stable, v):
    """The stable branch's amplitudes at airspeed v (linear interpolation on
    every stable stretch of the branch that spans v)."""
    found = []
    for i in range(len(speed) - 1):
        if stable[i] and stable[i + 1]:
            lo, hi = sorted((speed[i], speed[i + 1]))
            if lo <= v <= hi and hi > lo:
                t = (v - speed[i]) / (speed[i + 1] - speed[i])
                found.append(amplitude[i] + t * (amplitude[i + 1] - amplitude[i]))
    return found


def check_branch(out, rows, vd_tas, checks):
    """The branch against the sweep's independent time marches, and the
    Floquet accuracy check on every orbit."""
    def branch_and_sweep_agree():
        with h5py.File(os.path.join(out, "branch.h5"), "r") as f:
            watched = f.attrs["watched_dof"]
            watched = watched.decode() if isinstance(watched, bytes) else str(watched)
            speed = f["airspeed"][:]
            amp = f[f"{watched}_amplitude"][:]
            stable = f["stable"][:] > 0.5
            trivial = f["trivial_multiplier_error"][:]
            residual = f["residual"][:]
        # Floquet theory: one multiplier is exactly 1 along the flow
        # (Kuznetsov, "Elements of Applied Bifurcation Theory"): the 1e-8.
        assert np.all(trivial < 1e-8), trivial.max()
        assert np.all(residual < 1e-9), residual.max()
        with h5py.File(os.path.join(out, "sweep.h5"), "r") as f:
            v = f["flow_airspeed"][:]
            rc = f["response_class"][:]
            sw_amp = f[f"{watched}_amplitude"][:]
        compared = 0
        for d in (0, 1):
            for i in range(len(v)):
                if rc[d, i] != 1:
                    continue
                on_branch = branch_amplitude_at(speed, amp, stable, v[i])
                assert on_branch, f"periodic sweep run at {v[i]} m/s where the branch has no stable orbit"
                # The sweep's runs are time marches refined to orbits; the
                # branch between its points is a chord of a curve: 2e-3
                # relative covers the chord error at the study's step
                # (common practice, no source).
                err = min(abs(a - sw_amp[d, i]) for a in on_branch) / sw_amp[d, i]
                assert err < 2e-3, (v[i], sw_amp[d, i], on_branch)
                compared += 1
        assert compared > 0
    checks.run("every periodic sweep run lies on the stable branch; every orbit's trivial multiplier is 1",
               branch_and_sweep_agree)

    def largest_is_the_maximum():
        with h5py.File(os.path.join(out, "lco_orbit.h5"), "r") as f:
            watched = f.attrs["watched_dof"]
            watched = watched.decode() if isinstance(watched, bytes) else str(watched)
            a = f[f"{watched}_amplitude"][0]
            mu = f["largest_multiplier_modulus"][0]
            trivial = f["trivial_multiplier_error"][0]
            v_orbit = f["airspeed"][0]
        with h5py.File(os.path.join(out, "branch.h5"), "r") as f:
            speed = f["airspeed"][:]
            amp = f[f"{watched}_amplitude"][:]
            stable = f["stable"][:] > 0.5
        inside = stable & (speed <= vd_tas)
        # Refined to the maximum: at least every stable orbit of the branch
        # inside the envelope, and stable (|mu| < 1, Floquet theory).
        assert a >= amp[inside].max() * (1 - 1e-12), (a, amp[inside].max())
        assert mu < 1 and trivial < 1e-8 and v_orbit <= vd_tas, (mu, trivial, v_orbit)
    checks.run("the largest stable LCO is the branch's maximum inside the envelope, stable", largest_is_the_maximum)

    def found_ranges_are_the_stable_orbits():
        # The V-g figure's "stable LCOs found" strips (flutter.h5) are the
        # branch's runs of stable orbits, end to end (issue #15: the
        # freeplay band drawn where the LCOs were found).
        with h5py.File(os.path.join(out, "branch.h5"), "r") as f:
            speed = f["airspeed"][:]
            stable = f["stable"][:] > 0.5
        runs, start = [], None
        for i, st in enumerate(list(stable) + [False]):
            if st and start is None:
                start = i
            if not st and start is not None:
                runs.append((speed[start:i].min(), speed[start:i].max()))
                start = None
        with h5py.File(os.path.join(out, "flutter.h5"), "r") as f:
            lo, hi = f["lco_found_from"][:], f["lco_found_to"][:]
            assert f["lco_found_from"].attrs["units"] in (b"m s-1", "m s-1")
        assert runs and list(zip(lo, hi)) == runs, (list(zip(lo, hi)), runs)
    checks.run("flutter.h5 holds the speed ranges of the branch's stable orbits", found_ranges_are_the_stable_orbits)

    def bands_are_named():
        assert "lco_branch" in rows and "lco_branch_stable" in rows and "lco_branch_unstable" in rows
        bands = [k for k in rows if k.startswith("lco_hysteresis_fold_")]
        assert bands or "lco_hysteresis_branch" in rows
        for k in bands:
            lo, hi = (float(x) for x in re.findall(r"\d+(?:\.\d+)?(?:e[-+]?\d+)?", rows[k]["value"])[:2])
            fold = rows["lco_fold_" + k.rsplit("_", 1)[1]]["number"]
            assert math.isclose(min(lo, hi), float(f"{min(fold, lo):.4g}"), rel_tol=1e-3), (k, lo, hi, fold)
    checks.run("the branch's ranges, folds and hysteresis bands are in the summary", bands_are_named)


def check_demo(exe, src, work, checks):
    out = os.path.join(work, "demo")
    case = os.path.join(src, "cases", "demo_aileron.toml")
    summary = run_study(exe, case, out)
    rows = rows_by_id(summary)

    def files_written():
        for name in summary["hdf5_files"]:
            with h5py.File(os.path.join(out, name), "r") as f:
                assert f.attrs["aerosect_file_kind"] is not None, name
        for name in ("report.html", "summary.json", "case.toml", "check.json"):
            assert os.path.getsize(os.path.join(out, name)) > 0, name
        assert set(summary["hdf5_files"]) >= {"flutter.h5", "sweep.h5", "branch.h5", "lco_orbit.h5", "gust.h5",
                                              "response.h5", "lco.h5"}
        assert len(summary["figures"]) >= 8, summary["figures"]
        for p in summary["figures"]:
            assert os.path.getsize(p) > 10000, p
    checks.run("demo study writes every file", files_written)

    # Expected numbers, recomputed from the files the rows name.
    expected = {}
    with h5py.File(os.path.join(out, "flutter.h5"), "r") as f:
        for lin in ("nominal", "gap_open", "gap_closed"):
            for g in ("state_space", "pk"):
                grp = f[lin][g]
                ident = {"nominal": "linear", "gap_open": "gap_open", "gap_closed": "gap_closed"}[lin]
                if grp.attrs["flutter_found"]:
                    expected[f"{ident}_flutter_{g}"] = float(grp.attrs["flutter_speed"])
        ss = f["nominal"]["state_space"]
        if ss.attrs["divergence_found"]:
            expected["divergence"] = float(ss.attrs["divergence_speed"])
        rho = float(f.attrs["density"])
        vd = float(f.attrs["dive_speed_eas"])
    expected["clearance_speed"] = 1.15 * vd
    crit = min(expected["linear_flutter_state_space"], expected.get("divergence", math.inf))
    expected["margin"] = 100 * (crit * math.sqrt(rho / 1.225) / (1.15 * vd) - 1)
    vd_tas = vd / math.sqrt(rho / 1.225)
    sw = sweep_expectations(os.path.join(out, "sweep.h5"), vd_tas)
    flap_extremes = sw.pop("_flap_extremes", None)
    sweep_largest = sw.get("lco_largest")
    if rows["lco_largest"]["source"].startswith("lco_orbit.h5"):
        # The largest stable LCO is the converged orbit of lco_orbit.h5.
        for k in [k for k in sw if k.startswith("lco_largest")]:
            del sw[k]
        orbit = orbit_expectations(os.path.join(out, "lco_orbit.h5"))
        flap_extremes = orbit.pop("_flap_extremes")
        expected.update(orbit)
    expected.update(sw)
    expected.update(fold_expectations(os.path.join(out, "branch.h5")))
    with h5py.File(os.path.join(out, "lco.h5"), "r") as f:
        # The trajectory's extremes (root attributes), at least the samples'.
        expected["lco_hinge_moment"] = max(abs(float(f.attrs["hinge_moment_max"])),
                                           abs(float(f.attrs["hinge_moment_min"])))
        assert expected["lco_hinge_moment"] >= float(np.max(np.abs(f["hinge_moment"][:])))
    with h5py.File(os.path.join(out, "gust.h5"), "r") as f:
        peaks = f["peaks"].attrs
        for ch in ("plunge", "pitch", "flap", "lift", "pitching_moment", "hinge_moment"):
            key = f"critical_value_{ch}"
            if key in peaks:
                expected[f"gust_peak_{ch}"] = float(peaks[key]) * (DEG if ch in ("pitch", "flap") else 1)

    check_branch(out, rows, vd_tas, checks)
    check_preload(out, rows, checks, False)

    def at_least_the_sweep():
        # The sweep's periodic runs are orbits of the same section at fixed
        # speeds: none can exceed the branch's maximum inside the envelope.
        assert sweep_largest is not None and expected["lco_largest"] >= sweep_largest * (1 - 1e-9), \
            (expected["lco_largest"], sweep_largest)
    checks.run("the converged largest LCO is at least the sweep's largest periodic run", at_least_the_sweep)

    def numbers_match_files():
        missing = [k for k in expected if k not in rows]
        assert not missing, f"rows missing from the summary: {missing}"
        for k, want in expected.items():
            got = rows[k]["number"]
            assert got is not None and math.isclose(got, want, rel_tol=1e-12, abs_tol=1e-15), \
                f"{k}: summary {got} against file {want}"
    checks.run("every summary number equals its HDF5 source", numbers_match_files)

    def hinge_spring_moment():
        # Freeplay law of the demo (1 deg total gap, flap stiffness from its
        # frequency): the moment is K (|beta| - delta) outside the gap.
        with h5py.File(os.path.join(out, "sweep.h5"), "r") as f:
            k = float(f["parameters/si/flap_stiffness"][()])
        delta = 0.5 / DEG
        m = max(k * max(abs(x) - delta, 0.0) for x in flap_extremes)
        assert math.isclose(rows["lco_hinge_spring_moment"]["number"], m, rel_tol=1e-9), \
            (rows["lco_hinge_spring_moment"]["number"], m)
    checks.run("hinge-spring moment from the freeplay law at the LCO extremes", hinge_spring_moment)

    shot = os.path.join(out, "report_screenshot.png")
    result = {}

    def browser_opens():
        result.update(check_report(os.path.join(out, "report.html"), shot))
        assert result["images"], "no images"
        bad = [i["alt"][:40] for i in result["images"] if not i["loaded"]]
        assert not bad, f"images that did not load: {bad}"
        assert len(result["images"]) == len(summary["figures"])
        assert not result["console_errors"], result["console_errors"]
        assert result["screenshot_size"][1] > 3000
    checks.run("report opens in Chromium, every image loads", browser_opens)

    def table_rows():
        shown = result["summary_rows"]
        assert shown and shown[0][:2] == ["Quantity", "Value"], shown[:1]
        body = shown[1:]
        assert len(body) == len(summary["summary"])
        for cells, row in zip(body, summary["summary"]):
            assert cells[0] == row["quantity"].strip(), (cells[0], row["quantity"])
            assert cells[1] == row["value"], (cells[1], row["value"])
            if row["number"] is not None:
                assert float(cells[1]) == float(f"{row['number']:.4g}"), (cells[1], row["number"])
        needed = ["linear_flutter_state_space", "linear_flutter_pk", "divergence", "clearance_speed",
                  "margin", "gap_open_flutter_state_space", "gap_closed_flutter_state_space",
                  "lco_onset_up", "lco_persists_down", "hysteresis", "lco_branch", "lco_fold_1",
                  "lco_largest", "lco_largest_multiplier",
                  "lco_hinge_moment", "lco_hinge_spring_moment", "gust_peak_lift", "gust_peak_flap"]
        assert not [k for k in needed if k not in rows], [k for k in needed if k not in rows]
    checks.run("summary table shows every row with its value", table_rows)

    def cautions_first():
        html = open(os.path.join(out, "report.html"), encoding="utf-8").read()
        first_caution = html.find('id="caution"')
        assert 0 < first_caution < html.find('id="summary"')
        for phrase in ("preliminary design", "ground vibration tests", "flight flutter testing",
                       "licensed engineers", "applicable specification"):
            assert phrase in html[first_caution:html.find('id="summary"')], phrase
        assert 'id="case"' in html and "dive_speed_eas" in html and 'id="version"' in html
        # The caution box says it once (issue #15: not repeated inside its own box).
        assert html.count("ground vibration tests") == 1, html.count("ground vibration tests")
    checks.run("cautions at the top; case as run and version present", cautions_first)

    def provenance():
        # The report names what it was computed from: the case file's SHA-256
        # equals Python's hashlib (FIPS 180-4) of the file's bytes, and the
        # start time is an ISO 8601 UTC instant.
        summary = json.load(open(os.path.join(out, "summary.json"), encoding="utf-8"))
        case_file = os.path.join(src, "cases", "demo_aileron.toml")
        digest = hashlib.sha256(open(case_file, "rb").read()).hexdigest()
        assert summary["inputs"][0] == {"role": "case", "path": summary["case"], "sha256": digest}, summary["inputs"]
        started = datetime.datetime.strptime(summary["started_utc"], "%Y-%m-%dT%H:%M:%SZ")
        assert abs((datetime.datetime.utcnow() - started).total_seconds()) < 3600
        html = open(os.path.join(out, "report.html"), encoding="utf-8").read()
        assert digest in html and summary["started_utc"] in html and summary["aerosect_version"] in html
    checks.run("the report names its inputs by SHA-256, with the date and version", provenance)


def preload_answer(path):
    """The preload map's answer recomputed from preload.h5's response
    classes (periodic 1 or non-periodic 2 in either direction is an LCO):
    (levels by |level|, LCO per level, attributes)."""
    with h5py.File(path, "r") as f:
        key = f.attrs["preload_key"]
        key = key.decode() if isinstance(key, bytes) else str(key)
        levels = f[key.replace(".", "_")][:]
        cls = f["response_class"][:]
        attrs = {k: (v.decode() if isinstance(v, bytes) else v) for k, v in f.attrs.items()}
    lco = np.any((cls == 1) | (cls == 2), axis=0)
    order = np.argsort(np.abs(levels))
    return levels[order], lco[order], attrs


def check_preload(out, rows, checks, steady):
    """The preload rows against preload.h5 (and flutter.h5's equilibrium)."""
    levels, lco, attrs = preload_answer(os.path.join(out, "preload.h5"))

    def answer_is_the_files():
        last = max((i for i in range(len(levels)) if lco[i]), default=None)
        text = rows["preload_lco_limit"]["value"]
        assert text == attrs["preload_answer"], (text, attrs["preload_answer"])
        if last is None:
            assert "no LCO at any level" in text, text
        elif last + 1 == len(levels):
            assert "highest" in text or "every level" in text, text
        else:
            assert "disappears between" in text, text
            assert math.isclose(attrs["lco_disappears_above"], levels[last], rel_tol=1e-12), attrs
            assert math.isclose(attrs["lco_absent_from"], levels[last + 1], rel_tol=1e-12), attrs
        assert math.isclose(rows["preload_contact_level"]["number"], attrs["contact_level"], rel_tol=1e-12)
        if "hold_off_level" in attrs:
            assert math.isclose(rows["preload_hold_off"]["number"], attrs["hold_off_level"], rel_tol=1e-12)
            # Hold-off criterion (common practice, no source): no LCO once the
            # contact load exceeds the unloaded LCO's oscillating spring force.
            beyond = np.abs(levels) >= abs(attrs["hold_off_level"])
            assert not np.any(lco[beyond]), (levels, lco, attrs["hold_off_level"])
    checks.run("the preload answer is the preload map's response classes; none beyond the hold-off level",
               answer_is_the_files)

    if steady:
        def equilibrium_rows():
            with h5py.File(os.path.join(out, "flutter.h5"), "r") as f:
                flap = float(f["parameters/equilibrium/flap"][()])
                force = float(f["parameters/equilibrium/flap_spring_force"][()])
            assert math.isclose(rows["preload_equilibrium"]["number"], flap * DEG, rel_tol=1e-12)
            assert math.isclose(rows["preload_contact_load"]["number"], force, rel_tol=1e-12, abs_tol=1e-15)
            assert rows["preload_held"]["value"].startswith("no: the flap rests in its gap"), rows["preload_held"]
        checks.run("preload rows: the equilibrium of flutter.h5, the flap in its gap at 27 m/s", equilibrium_rows)


def check_trimmed(exe, src, work, checks):
    """The trimmed demo at 27 m/s: its aileron rests in the gap and oscillates."""
    out = os.path.join(work, "trimmed")
    case = os.path.join(src, "cases", "demo_aileron_trimmed.toml")
    summary = run_study(exe, case, out, "--no-plots", "--sweep-points", "9", "--set", "flow.airspeed=27")
    rows = rows_by_id(summary)
    checks.run("trimmed study writes preload.h5", lambda: "preload.h5" in summary["hdf5_files"])
    check_preload(out, rows, checks, True)


def check_plain_case(exe, src, work, checks):
    text = open(os.path.join(src, "cases", "demo_aileron.toml"), encoding="utf-8").read()
    text = re.sub(r"\[springs\.flap\][^\[]*", "", text)
    text = re.sub(r"\[\[gust\]\][^\[]*$", "", text, flags=re.S)
    case = os.path.join(work, "plain.toml")
    with open(case, "w", encoding="utf-8") as fh:
        fh.write(text)
    out = os.path.join(work, "plain")

    def skips():
        summary = run_study(exe, case, out, "--no-plots")
        parts = {p["name"]: p for p in summary["parts"]}
        assert not parts["lco-sweep"]["done"] and "no nonlinear spring" in parts["lco-sweep"]["detail"]
        assert not parts["gust-sweep"]["done"] and "no [[gust]]" in parts["gust-sweep"]["detail"]
        assert parts["flutter"]["done"] and parts["response"]["done"]
        assert "sweep.h5" not in summary["hdf5_files"] and "gust.h5" not in summary["hdf5_files"]
        html = open(os.path.join(out, "report.html"), encoding="utf-8").read()
        assert "skipped: the case has no nonlinear spring" in html
        assert "skipped: the case has no [[gust]]" in html
        assert "--no-plots was given" in html
    checks.run("a case without freeplay or gusts skips those parts and says so", skips)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("aerosect")
    ap.add_argument("source_dir")
    ap.add_argument("--keep")
    a = ap.parse_args()
    work = a.keep or tempfile.mkdtemp(prefix="aerosect-study-")
    os.makedirs(work, exist_ok=True)
    checks = Checks()
    try:
        check_demo(a.aerosect, a.source_dir, work, checks)
        check_plain_case(a.aerosect, a.source_dir, work, checks)
        check_trimmed(a.aerosect, a.source_dir, work, checks)
    finally:
        if not a.keep:
            shutil.rmtree(work, ignore_errors=True)
    return checks.summary()


if __name__ == "__main__":
    sys.exit(main())

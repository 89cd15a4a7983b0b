#!/usr/bin/python3
"""Turbulence records against the analytic PSD.

    test_turbulence_psd.py SOURCE_DIR DUMP

DUMP is the aerosect_turbulence_dump program (or a build directory holding
tests/aerosect_turbulence_dump). Generates Dryden and von Karman records and
compares their Welch PSD (scipy.signal.welch) with the analytic temporal PSD
Phi_t(omega) = Phi(omega/V)/V of the theory sheet (sec. 5, the MIL-F-8785C
forms), folded about the Nyquist frequency as sampling folds it:
    Phi_d(omega) = sum_m Phi_t(|omega + m omega_s|),  omega_s = 2 pi / dt.

Statistical bounds. A Welch estimate averaged over K Hann-windowed segments
with 50 % overlap is, at each frequency bin other than 0 and Nyquist,
Phi_d chi^2_nu / nu with nu = 2K / (1 + 2 sum_j (1 - j/K) rho_j), rho_j the
squared normalised overlap correlation of the window at shift j D (Welch
1967; 1/9 for Hann at 50 %). Each bin is checked against the two-sided 99 %
chi-square band; about 1 % of the bins fall outside by chance. Neighbouring
Hann bins are correlated (periodogram correlation 4/9 at one bin, 1/36 at
two), which inflates the variance of that count by at most 1 + 2 (4/9 +
1/36) = 1.94, so up to 1 % + 4 standard deviations of the count (2.2 % of
2047 bins) may lie outside. The bins are also averaged in eight bands: each
band mean of estimate/analytic must be 1 within 4 of its standard deviations
sqrt(1.94 (2/nu) / n_bins), which catches biases of 1-3 % that a per-bin
band cannot. Hann leakage biases a bin by about (1/6) Phi''/Phi (bin width)^2;
bins where that exceeds 0.2 % (the lowest few of a finely sampled record)
are left out.

The von Karman record follows its 4th-order shaping filter, so it is checked
against the folded filter PSD (exact) and against the folded von Karman
formula with the filter's stated 5 % error added to the bands.

Prints one line per check and a last line "N passed, M failed"; exits 1 when
a check failed.
"""

import math
import os
import subprocess
import sys
import tempfile
import traceback

import numpy as np
from scipy import signal, stats


sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from test_plot_flutter import Checks  # noqa: E402


# --- the program under test --------------------------------------------------

def find_dump(arg):
    if os.path.isdir(arg):
        for candidate in ("tests/aerosect_turbulence_dump", "aerosect_turbulence_dump"):
            path = os.path.join(arg, candidate)
            if os.access(path, os.X_OK):
                return path
        raise SystemExit(f"no aerosect_turbulence_dump under {arg}")
    return arg


DUMP = None
TMP = None


def record(model, sigma, L, V, dt, n, seed):
    path = os.path.join(TMP, f"{model}-{seed}-{n}.bin")
    subprocess.run([DUMP, "record", model, repr(sigma), repr(L), repr(V), repr(dt), str(n),
                    str(seed), path], check=True)
    w = np.fromfile(path, dtype=np.float64)
    assert w.size == n, f"record has {w.size} samples, expected {n}"
    return w


def filter_psd(model, sigma, L, V, omega):
    omega = np.ascontiguousarray(omega, dtype=np.float64)
    out = subprocess.run([DUMP, "filter-psd", model, repr(sigma), repr(L), repr(V)],
                         input=omega.tobytes(), stdout=subprocess.PIPE, check=True).stdout
    psd = np.frombuffer(out, dtype=np.float64)
    assert psd.size == omega.size
    return psd.reshape(omega.shape)


# --- analytic spectra (theory sheet sec. 5; MIL-F-8785C forms) ----------------

def phi_spatial(model, sigma, L, Omega):
    x = L * np.abs(Omega)
    if model == "dryden":
        return sigma**2 * L / math.pi * (1 + 3 * x**2) / (1 + x**2) ** 2
    y2 = (1.339 * x) ** 2
    return sigma**2 * L / math.pi * (1 + 8.0 / 3.0 * y2) / (1 + y2) ** (11.0 / 6.0)


def phi_temporal(model, sigma, L, V, omega):
    return phi_spatial(model, sigma, L, np.asarray(omega) / V) / V


def fold(psd, omega, dt, images, slope):
    """sum_{|m| <= images} psd(|omega + m omega_s|) plus the tail m > images
    from the power-law asymptote psd ~ c omega^-slope (integral of the sum)."""
    ws = 2 * math.pi / dt
    m = np.arange(-images, images + 1)
    total = np.zeros_like(omega)
    for chunk in np.array_split(m, max(1, m.size // 64)):
        total += psd(np.abs(omega[:, None] + chunk[None, :] * ws)).sum(axis=1)
    big = (images + 0.5) * ws
    c = psd(np.array([big]))[0] * big**slope
    tail = 2 * c * ws**-slope * (images + 0.5) ** (1 - slope) / (slope - 1)
    return total + tail


# --- Welch statistics ----------------------------------------------------------

NPERSEG = 4096
NOVERLAP = NPERSEG // 2


def welch(w, dt):
    f, p = signal.welch(w, fs=1 / dt, window="hann", nperseg=NPERSEG, noverlap=NOVERLAP,
                        detrend=False, scaling="density", return_onesided=True)
    return 2 * math.pi * f, p / (2 * math.pi)  # rad/s, one-sided per rad/s


def welch_dof(n):
    """Equivalent chi-square degrees of freedom of the Welch average."""
    win = signal.get_window("hann", NPERSEG)
    step = NPERSEG - NOVERLAP
    K = (n - NOVERLAP) // step
    s = 0.0
    j = 1
    while j * step < NPERSEG and j < K:
        rho = (np.dot(win[j * step:], win[:NPERSEG - j * step]) / np.dot(win, win)) ** 2
        s += (1 - j / K) * rho
        j += 1
    return 2 * K / (1 + 2 * s), K


LEAKAGE_LIMIT = 0.002


def usable_bins(ref):
    """Bins (not DC, not Nyquist) where the Hann leakage bias of the Welch
    estimate, (1/6) (second difference of ref) / ref to leading order (the
    Hann spectral window has second moment 1/3 bin^2), is below 0.2 %: well
    under the 4-standard-deviation allowance of any band mean. It excludes
    the lowest bins of a record whose bin width is coarse against the
    spectrum's knee."""
    bias = np.zeros_like(ref)
    bias[1:-1] = (ref[2:] - 2 * ref[1:-1] + ref[:-2]) / (6 * ref[1:-1])
    keep = np.abs(bias) <= LEAKAGE_LIMIT
    keep[0] = keep[-1] = False  # DC and Nyquist: half the degrees of freedom
    return keep


ALPHA = 0.01
CORRELATION_INFLATION = 1 + 2 * (4 / 9 + 1 / 36)


def allowed_outside(nbins):
    return ALPHA + 4 * math.sqrt(CORRELATION_INFLATION * ALPHA * (1 - ALPHA) / nbins)


def chi_square_check(ratio, nu, widen=0.0, label=""):
    """ratio = estimate/analytic over bins; widen: extra relative allowance
    (approximation error of the analytic reference)."""
    lo = stats.chi2.ppf(ALPHA / 2, nu) / nu * (1 - widen)
    hi = stats.chi2.ppf(1 - ALPHA / 2, nu) / nu * (1 + widen)
    outside = np.count_nonzero((ratio < lo) | (ratio > hi)) / ratio.size
    print(f"  {label}: nu = {nu:.0f}, band [{lo:.3f}, {hi:.3f}], "
          f"{100 * outside:.2f} % of {ratio.size} bins outside "
          f"(allowed {100 * allowed_outside(ratio.size):.2f} %)")
    assert outside <= allowed_outside(ratio.size), \
        f"{100 * outside:.2f} % of the bins outside the 99 % band"


def band_means_check(omega, ratio, nu, T, widen=0.0, label=""):
    """Mean of estimate/analytic in log-spaced bands of omega T (bands of
    fewer than 20 bins merged into the next)."""
    x = omega * T
    edges = np.geomspace(x[0], x[-1] * (1 + 1e-12), 9)
    groups, start = [], 0
    for hi in edges[1:]:
        stop = int(np.searchsorted(x, hi, side="right"))
        if stop - start >= 20 or hi == edges[-1]:
            groups.append((start, stop))
            start = stop
    for a, b in groups:
        r = ratio[a:b]
        sd = math.sqrt(CORRELATION_INFLATION * (2 / nu) / r.size)
        limit = widen + 4 * sd
        print(f"  {label}: omega T {x[a]:8.3f}..{x[b - 1]:8.1f} ({r.size:4d} bins)"
              f"  mean ratio {r.mean():.4f}  (sd {sd:.4f}, allowed deviation {limit:.4f})")
        assert abs(r.mean() - 1) <= limit, \
            f"mean ratio {r.mean():.4f} over omega T {x[a]:.3f}..{x[b - 1]:.1f} off by more than {limit:.4f}"


# --- checks --------------------------------------------------------------------

N = 1 << 20


def check_dryden():
    sigma, L, V = 2.0, 533.4, 150.0  # 1750 ft, the MIL-F-8785C medium/high-altitude L_w
    T = L / V
    dt = T / 40
    w = record("dryden", sigma, L, V, dt, N, 1)
    omega, p = welch(w, dt)
    ref = fold(lambda om: phi_temporal("dryden", sigma, L, V, om), omega, dt, 2000, 2.0)
    use = usable_bins(ref)
    print(f"  Dryden: {np.count_nonzero(~use[1:-1])} low bins left out for leakage")
    omega, p, ref = omega[use], p[use], ref[use]
    # The folded sum has a closed form through the sampled autocorrelation,
    # Phi_d = (dt/pi)(R_0 + 2 sum_k R_k cos(omega k dt)),
    # R_k = sigma^2 e^{-k dt/T}(1 - k dt/(2T)): checks the folding itself.
    k = np.arange(1, int(80 * T / dt))
    Rk = sigma**2 * np.exp(-k * dt / T) * (1 - k * dt / (2 * T))
    closed = dt / math.pi * (sigma**2 + 2 * np.cos(np.outer(omega, k) * dt) @ Rk)
    assert np.max(np.abs(ref / closed - 1)) < 1e-6, "image sum and autocorrelation sum disagree"
    nu, K = welch_dof(N)
    print(f"  Dryden: {K} segments of {NPERSEG}, omega T from {omega[0] * T:.3f} to "
          f"{omega[-1] * T:.1f}")
    ratio = p / ref
    chi_square_check(ratio, nu, label="Dryden vs folded analytic PSD")
    band_means_check(omega, ratio, nu, T, label="Dryden")
    # Mean square: relative sd sqrt(5T/(4 N dt)) for Dryden (Parseval on the
    # spectrum; 0.69 % here), within 4 of them.
    var = np.mean(w**2)
    sd = math.sqrt(5 * T / (4 * N * dt))
    print(f"  Dryden: mean square / sigma^2 = {var / sigma**2:.4f} (sd {sd:.4f})")
    assert abs(var / sigma**2 - 1) <= 4 * sd, "record variance is not sigma^2"


def check_von_karman(dt_over_T, seed):
    sigma, L, V = 2.0, 762.0, 200.0  # 2500 ft, the airworthiness rules' L
    T = L / V
    dt = T * dt_over_T
    w = record("von-karman", sigma, L, V, dt, N, seed)
    omega_all, p_all = welch(w, dt)
    nu, K = welch_dof(N)

    # (1) Against the PSD the filter realises, folded (exact for the record).
    ref_filter = fold(lambda om: filter_psd("von-karman", sigma, L, V, om), omega_all, dt, 60,
                      2.0)
    use = usable_bins(ref_filter)
    omega, p = omega_all[use], p_all[use]
    print(f"  von Karman, dt = T/{1 / dt_over_T:.0f}: omega T from {omega[0] * T:.3f} to "
          f"{omega[-1] * T:.1f} ({np.count_nonzero(~use[1:-1])} low bins left out for leakage)")
    ratio = p / ref_filter[use]
    chi_square_check(ratio, nu, label="von Karman vs folded filter PSD")
    band_means_check(omega, ratio, nu, T, label="von Karman (filter)")

    # (2) Against the exact von Karman formula, folded. The filter is within
    # 5 % of it for L Omega <= 1000 (unit tests) and below it beyond, so
    # aliased content from beyond 1000 can be off by at most its share f_out
    # of the folded PSD: keep the bins where f_out <= 2 % and allow
    # 5 % + 2 % on top of chance.
    exact = lambda om: phi_temporal("von-karman", sigma, L, V, om)
    ref_exact = fold(exact, omega_all, dt, 4000, 5.0 / 3.0)
    use = usable_bins(ref_exact)
    omega, p, ref_exact = omega_all[use], p_all[use], ref_exact[use]
    ws = 2 * math.pi / dt
    m = np.arange(-4000, 4001)
    inside = np.zeros_like(omega)
    for chunk in np.array_split(m, 125):
        om = np.abs(omega[:, None] + chunk[None, :] * ws)
        inside += np.where(om * T <= 1000.0, exact(om), 0.0).sum(axis=1)
    keep = 1 - inside / ref_exact <= 0.02
    print(f"  {np.count_nonzero(keep)} bins up to omega T = {omega[keep][-1] * T:.1f} have "
          f"<= 2 % aliased content from beyond L Omega = 1000")
    ratio = p[keep] / ref_exact[keep]
    chi_square_check(ratio, nu, widen=0.05 + 0.02, label="von Karman vs folded exact PSD")
    band_means_check(omega[keep], ratio, nu, T, widen=0.05 + 0.02, label="von Karman (exact)")


def check_reproducible():
    a = record("dryden", 1.0, 300.0, 100.0, 0.05, 20000, 7)
    b = record("dryden", 1.0, 300.0, 100.0, 0.05, 20000, 7)
    c = record("dryden", 1.0, 300.0, 100.0, 0.05, 20000, 8)
    assert a.tobytes() == b.tobytes(), "same seed, different bits"
    assert np.count_nonzero(a == c) == 0, "another seed repeats samples"
    text = subprocess.run([DUMP, "record", "dryden", "1.0", "300.0", "100.0", "0.05", "20000",
                           "7"], stdout=subprocess.PIPE, check=True, text=True).stdout
    assert np.array_equal(np.array([float(v) for v in text.split()]), a), \
        "text output differs from the binary record"


def check_bad_arguments():
    r = subprocess.run([DUMP, "record", "dryden", "1.0", "300.0", "100.0", "-0.05", "10", "1"],
                       stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    assert r.returncode == 2 and "dt > 0" in r.stderr, (r.returncode, r.stderr)


def main(argv):
    global DUMP, TMP
    if len(argv) != 3:
        print(__doc__)
        return 2
    DUMP = find_dump(argv[2])
    checks = Checks()
    with tempfile.TemporaryDirectory() as tmp:
        TMP = tmp
        checks.run("Dryden record: Welch PSD within chi-square bands of the formula", check_dryden)
        checks.run("von Karman record (dt = T/40): Welch PSD against filter and formula",
                   check_von_karman, 1 / 40, 2)
        checks.run("von Karman record (dt = T/400): Welch PSD against filter and formula",
                   check_von_karman, 1 / 400, 3)
        checks.run("von Karman record (dt = T/4000): Welch PSD against filter and formula",
                   check_von_karman, 1 / 4000, 4)
        checks.run("same seed same bits, text and binary output agree", check_reproducible)
        checks.run("bad arguments are reported", check_bad_arguments)
    return checks.summary()


if __name__ == "__main__":
    sys.exit(main(sys.argv))

"""Plots of aerosect result files (HDF5, see include/aerosect/io/hdf5_writer.hpp).

    tools/plot FILE.h5 [-o OUTDIR]         (the command: a thin wrapper over main())
    python3 -m aerosect.plot FILE.h5 [-o OUTDIR]   (with python/ on PYTHONPATH)

As a library: plot_file(path, outdir) plots every figure of a file and
returns the paths written; each figure also has its own function taking the
open h5py.File, the stem of the output names and the output directory, and
returning the path it wrote (plot_time_histories, plot_phase_portraits,
plot_vg, plot_vg_gaps, plot_sweep, plot_branch, plot_gust_sweep). PlotError says why a
file cannot be plotted. Everything a figure shows is read from the file
itself (datasets and attributes).

The root attribute `aerosect_file_kind` selects the plotter. For a
`simulation` file it writes, into OUTDIR (default: the directory of FILE):
  <stem>_time.png   stacked time histories sharing the time axis: the gust
                    velocity at the leading edge and the Kussner-weighted
                    velocity on top (when the file has gusts), then plunge
                    in mm, pitch and flap in degrees, lift and moments in
                    the file's units (only the datasets present), each
                    labelled with its sign convention;
  <stem>_phase.png  one phase portrait (displacement against velocity) per
                    degree of freedom, the start marked.
For a `flutter` file it writes:
  <stem>_vg.png       the V-g diagram (damping ratio against true airspeed,
                      zero line) above the V-f diagram (frequency in Hz), one
                      colour per mode, state-space solid and p-k dashed, for
                      the `nominal` linearisation (else the first present);
                      flutter crossings marked and labelled with their speed,
                      divergence as a vertical dotted line, 1.15 V_D (from
                      clearance_speed_tas, or dive_speed_eas and density) as
                      a line with the V_D..1.15 V_D band shaded; a top axis in
                      U/(b omega_alpha) when the reference speed is known;
  <stem>_vg_gaps.png  only when gap_open and gap_closed are present: their
                      state-space damping, with the band between their
                      flutter speeds shaded as the linear freeplay bound
                      and, when the file holds them (a study's flutter.h5:
                      lco_found_from/_to), the speed ranges where stable
                      LCOs were actually found, hatched along the bottom.
  Both show the damping ratio zeta, or g = 2 zeta with --damping g
  (plot_file(..., damping="g")); negative damping is unstable.
  Both end the speed axis at 1.5 times the highest flutter, divergence or
  1.15 V_D speed when the sweep runs much further (the title says so).
For a `sweep` file (aerosect sweep -o) it writes:
  <stem>_bifurcation.png  amplitude of the watched DOF against the first
                      swept key (axis label with units), sweep up filled and
                      down open; one key: coloured by response class, with
                      the describing-function LCO curve and the linear
                      flutter speeds (decayed runs at zero: no LCO); two keys: one curve per value of the
                      second key (at most six, evenly picked). Divergent
                      runs sit on the top edge (their amplitude is off scale).
For an `orbit_branch` file (aerosect orbits -o, the study's branch.h5) it writes:
  <stem>_branch.png   the branch's limit cycles: amplitude of the watched DOF
                      against the continuation key, stable orbits solid and
                      unstable cycles dashed, folds, period doublings, torus
                      and branch points and grazing ends marked, V_D and
                      1.15 V_D marked (airspeed key), and the periodic runs
                      of the sweep file named by `overlay_sweep_file` drawn
                      over it (other runs are not LCOs and are not drawn).
                      A file of one orbit (lco_orbit.h5) gets no figure.
For a `gust-sweep` file (aerosect gust -o) it writes:
  <stem>_gust_peaks.png  largest and smallest value of plunge, pitch, flap
                      (left) and lift, pitching and hinge moment (right)
                      against the gust gradient H in m (ft on top), the
                      critical H of each starred; a U_ds-against-H panel on
                      top when the design gust velocity varies with H (CS-25
                      sizing), else U_ds in the caption with the altitude,
                      airspeed and density (for a CS-23-sized gust also that
                      it is U_de, whose values are recalled from memory and
                      to be checked against the rule's text); a note when the case starts away
                      from rest (the peaks then hold the release transient).
The paths written are printed one per line. A file that is not an aerosect
result, or of a kind without a plotter, exits with status 2.

Other kinds are added as a function taking (file, stem, outdir) and
returning the paths written, registered in PLOTTERS.
"""

import argparse
import math
import os
import re
import sys
import textwrap

import matplotlib

matplotlib.use("Agg")

import h5py  # noqa: E402
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

WIDTH_IN = 7.5  # 900 px at DPI
DPI = 120


class PlotError(Exception):
    """A file this tool cannot plot; the message is shown as is."""


def read_float(dataset):
    """A dataset as floats; an integer table's declared _FillValue (a cell
    without a value: a point not run) as NaN, as in a double table."""
    values = np.asarray(dataset[()], dtype=float)
    fill = dataset.attrs.get("_FillValue")
    if fill is not None and dataset.dtype.kind in "iu":
        values[values == float(np.asarray(fill).ravel()[0])] = np.nan
    return values


def sweep_axes(f):
    """The swept axes of a sweep file in order (datasets, each named after
    its key with the key in its `key` attribute): the dimension scales of
    response_class after `direction`."""
    if "response_class" not in f:
        raise PlotError("sweep file without 'response_class'")
    table = f["response_class"]
    axes = [table.dims[k][0] for k in range(1, table.ndim) if len(table.dims[k])]
    if not axes or len(axes) != table.ndim - 1:
        raise PlotError("sweep file whose 'response_class' has no swept axis attached")
    return axes


def text_attribute(obj, name, default=None):
    """A string attribute as str (older files hold fixed-length strings,
    which h5py gives as bytes)."""
    if name not in obj.attrs:
        return default
    value = obj.attrs[name]
    if isinstance(value, np.ndarray) and value.shape == ():
        value = value[()]
    if isinstance(value, (bytes, np.bytes_)):
        return value.decode("utf-8", errors="replace").rstrip("\0")
    return str(value)


# Display units: UDUNITS string in the file -> (factor, unit shown).
DISPLAY_UNITS = {
    "m": (1000.0, "mm"),
    "m s-1": (1000.0, "mm s-1"),
    "rad": (180.0 / math.pi, "deg"),
    "rad s-1": (180.0 / math.pi, "deg s-1"),
}


def pretty_units(units):
    """UDUNITS exponents as superscripts: 'N m m-1' -> 'N m m$^{-1}$'."""
    return re.sub(r"(?<=[A-Za-z])(-?\d+)\b", r"$^{\1}$", units)


def series(f, name, convert=True, separator=" "):
    """(values, axis label) of dataset `name`, in display units, or None."""
    if name not in f or not isinstance(f[name], h5py.Dataset):
        return None
    dataset = f[name]
    values = np.asarray(dataset[()], dtype=float)
    units = text_attribute(dataset, "units", "")
    factor, shown = DISPLAY_UNITS.get(units, (1.0, units)) if convert else (1.0, units)
    label = name.replace("_", " ")
    if shown and shown != "1":
        label += f"{separator}[{pretty_units(shown)}]"
    return values * factor, label


def figure_title(f):
    title = text_attribute(f, "title", "") or "aerosect simulation"
    complete = f.attrs.get("complete")
    if complete is not None and int(complete) == 0:
        title += f" (incomplete: {text_attribute(f, 'status', 'unknown status')})"
    return title


def save(fig, path):
    fig.savefig(path, dpi=DPI)
    plt.close(fig)
    return path


# Sign conventions of the simulation channels (include/aerosect/model/system.hpp),
# shown under the units so that a reader need not look them up.
SIGNS = {
    "plunge": "+ down",
    "pitch": "+ nose up",
    "flap": "+ TE down",
    "lift": "+ up",
    "pitching_moment": "+ nose up",
    "hinge_moment": "+ TE down",
}


def signed_label(label, name):
    """'pitch\n[deg]' -> 'pitch\n[deg]\n+ nose up'."""
    sign = SIGNS.get(name)
    return f"{label}\n{sign}" if sign else label


def gust_panel(f):
    """[(values, legend text, style)] of the gust velocities, or None when the
    file has none or they are zero throughout."""
    gust = series(f, "gust_velocity", convert=False)
    if gust is None or gust[0].ndim != 1 or not np.any(np.abs(gust[0]) > 0):
        return None
    lines = [(gust[0], "gust velocity $w_g$ at the leading edge", "-")]
    effective = series(f, "gust_effective_velocity", convert=False)
    if effective is not None and effective[0].shape == gust[0].shape:
        lines.append((effective[0], "Küssner-weighted $\\hat{w}$", "--"))
    return lines


def plot_time_histories(f, stem, outdir):
    """<stem>_time.png: the stacked time histories of a simulation file."""
    if "time" not in f:
        raise PlotError("simulation file without a 'time' dataset")
    time, time_label = series(f, "time", convert=False)
    panels = [
        (p[0], signed_label(p[1], n))
        for n in ("plunge", "pitch", "flap", "lift", "pitching_moment", "hinge_moment")
        if (p := series(f, n, separator="\n")) is not None and p[0].ndim == 1
    ]
    if not panels:
        raise PlotError("simulation file without plunge, pitch, flap, lift or moments")
    gust = gust_panel(f)
    rows = len(panels) + (gust is not None)
    fig, axes = plt.subplots(rows, 1, sharex=True, squeeze=False,
                             figsize=(WIDTH_IN, 1.0 + 1.3 * rows), layout="constrained")
    column = list(axes[:, 0])
    if gust is not None:
        # The gust on top, on the same time axis as the responses.
        ax = column.pop(0)
        for values, text, style in gust:
            ax.plot(time, values, style, color="tab:purple", linewidth=1.1, label=text)
        ax.set_ylabel("gust\n[m s$^{-1}$]\n+ up")
        ax.legend(fontsize="small", loc="upper right", frameon=False)
        ax.grid(True, linewidth=0.4, alpha=0.6)
        ax.axhline(0.0, color="black", linewidth=0.6)
    for ax, (values, label) in zip(column, panels):
        ax.plot(time, values, linewidth=0.9)
        ax.set_ylabel(label)
        ax.grid(True, linewidth=0.4, alpha=0.6)
        ax.axhline(0.0, color="black", linewidth=0.6)
    fig.align_ylabels(axes[:, 0])
    axes[-1, 0].set_xlabel(time_label)
    axes[-1, 0].set_xlim(time[0], time[-1])
    axes[0, 0].set_title(figure_title(f), fontsize="medium")
    return save(fig, os.path.join(outdir, f"{stem}_time.png"))


def plot_phase_portraits(f, stem, outdir):
    """<stem>_phase.png: one phase portrait per DOF; None when the file has no
    displacement with its velocity."""
    dofs = []
    for name in ("plunge", "pitch", "flap"):
        displacement = series(f, name)
        velocity = series(f, f"{name}_velocity")
        if displacement is not None and velocity is not None:
            dofs.append((name, displacement, velocity))
    if not dofs:
        return None
    fig, axes = plt.subplots(1, len(dofs), squeeze=False,
                             figsize=(WIDTH_IN, 3.8 if len(dofs) > 1 else 5.2))
    for ax, (name, (x, x_label), (v, v_label)) in zip(axes[0], dofs):
        ax.plot(x, v, linewidth=0.7)
        finite = np.flatnonzero(np.isfinite(x) & np.isfinite(v))
        if finite.size:
            ax.plot(x[finite[0]], v[finite[0]], "o", color="tab:green", label="start")
            ax.plot(x[finite[-1]], v[finite[-1]], "s", color="tab:red", label="end")
        ax.set_xlabel(x_label)
        ax.set_ylabel(v_label)
        ax.set_title(name, fontsize="medium")
        ax.grid(True, linewidth=0.4, alpha=0.6)
    fig.suptitle(figure_title(f), fontsize="medium", x=0.02, ha="left")
    fig.tight_layout(rect=(0, 0, 1, 0.93))
    handles, labels = axes[0, 0].get_legend_handles_labels()
    if handles:
        fig.legend(handles, labels, loc="upper right", ncol=2, fontsize="small",
                   frameon=False)
    return save(fig, os.path.join(outdir, f"{stem}_phase.png"))


def plot_simulation(f, stem, outdir):
    written = [plot_time_histories(f, stem, outdir)]
    phase = plot_phase_portraits(f, stem, outdir)
    if phase is not None:
        written.append(phase)
    return written


# --- flutter -----------------------------------------------------------------

LINEARISATIONS = ("nominal", "gap_closed", "gap_open", "describing_function")
METHODS = (("state_space", "-", "state space"), ("pk", "--", "p-k"))
SEA_LEVEL_DENSITY = 1.225  # kg m-3, ISA sea level (ISO 2533), for EAS -> TAS


def number_attribute(obj, name):
    """A numeric attribute as float; NaN when absent or not a number."""
    if name not in obj.attrs:
        return math.nan
    try:
        return float(np.asarray(obj.attrs[name]).reshape(-1)[0])
    except (TypeError, ValueError, IndexError):
        return math.nan


def found(group, kind):
    """The speed of `kind` ("flutter", "divergence") in a method group, or None."""
    if number_attribute(group, f"{kind}_found") != 1:
        return None
    speed = number_attribute(group, f"{kind}_speed")
    return speed if math.isfinite(speed) else None


def flutter_axes(f):
    """(speed, reduced-speed factor or None, mode labels) of a flutter file."""
    if "speed" not in f or not isinstance(f["speed"], h5py.Dataset):
        raise PlotError("flutter file without a 'speed' axis (no speeds were swept?)")
    speed = np.asarray(f["speed"][()], dtype=float)
    if speed.ndim != 1 or speed.size == 0:
        raise PlotError("flutter file with an empty or malformed 'speed' axis")
    reference = number_attribute(f, "reference_speed")
    if not (math.isfinite(reference) and reference > 0):
        reference = None
        if "reduced_speed" in f:
            reduced = np.asarray(f["reduced_speed"][()], dtype=float)
            ok = np.isfinite(reduced) & (reduced > 0)
            if reduced.shape == speed.shape and ok.any():
                reference = float(np.median(speed[ok] / reduced[ok]))
    n_modes = None
    names = []
    if "mode" in f:
        n_modes = int(f["mode"].shape[0])
        names = [n.strip() for n in (text_attribute(f["mode"], "mode_names", "") or "").split(",")]
    labels = []
    for k in range(n_modes or 0):
        name = names[k] if k < len(names) and names[k] else ""
        labels.append(f"mode {k + 1} ({name})" if name else f"mode {k + 1}")
    return speed, reference, labels


def method_data(f, linearisation, method, n_speeds):
    """(group, damping [speed x mode], frequency [speed x mode]) or None."""
    path = f"{linearisation}/{method}"
    if path not in f or not isinstance(f[path], h5py.Group):
        return None
    group = f[path]
    arrays = []
    for name in ("damping_ratio", "frequency"):
        if name not in group:
            raise PlotError(f"'{path}' has no '{name}' dataset")
        values = np.asarray(group[name][()], dtype=float)
        if values.ndim != 2 or values.shape[0] != n_speeds:
            raise PlotError(f"'{path}/{name}' is {values.shape}, not (speed, mode) "
                            f"with {n_speeds} speeds")
        arrays.append(values)
    if arrays[0].shape != arrays[1].shape:
        raise PlotError(f"'{path}': damping_ratio and frequency differ in shape")
    return group, arrays[0], arrays[1]


def mode_labels(labels, n):
    return labels if len(labels) == n else [f"mode {k + 1}" for k in range(n)]


def clearance_speeds(f):
    """(V_D, 1.15 V_D) as true airspeeds, or None when the file has neither."""
    clearance = number_attribute(f, "clearance_speed_tas")
    dive_eas = number_attribute(f, "dive_speed_eas")
    density = number_attribute(f, "density")
    tas_factor = (math.sqrt(SEA_LEVEL_DENSITY / density)
                  if math.isfinite(density) and density > 0 else math.nan)
    if not math.isfinite(clearance):
        clearance = 1.15 * dive_eas * tas_factor  # NaN when either is unknown
    if not math.isfinite(clearance):
        return None
    return clearance / 1.15, clearance


def add_reduced_speed_axis(ax, reference):
    if reference is None:
        return
    top = ax.secondary_xaxis("top", functions=(lambda v: v / reference,
                                               lambda r: r * reference))
    top.set_xlabel(r"reduced speed $U/(b\,\omega_\alpha)$")


def footnote(fig, f, note=None):
    """`note` and the file's caution in small print under the axes, which
    constrained layout is told to keep clear of."""
    caution = " ".join(t for t in (note, text_attribute(f, "caution", "")) if t)
    if not caution:
        return
    lines = textwrap.wrap(caution, 140)
    height_in = fig.get_size_inches()[1]
    bottom = (0.08 + 0.13 * len(lines)) / height_in  # x-small text is ~0.11 in a line
    fig.get_layout_engine().set(rect=(0, bottom, 1, 1 - bottom))
    fig.text(0.01, 0.008, "\n".join(lines), fontsize="x-small", color="0.35", ha="left",
             va="bottom")


def mark_clearance(axes, clearance, label_axis, at_top):
    """The V_D..1.15 V_D band and the 1.15 V_D line, labelled at the top or
    the foot of `label_axis` (wherever the flutter labels are not)."""
    if clearance is None:
        return
    dive, required = clearance
    for ax in axes:
        ax.axvspan(dive, required, color="0.85", alpha=0.6, linewidth=0, zorder=0)
        ax.axvline(required, color="0.3", linestyle="-.", linewidth=1.0, zorder=1)
    label_axis.annotate(r"$1.15\,V_D$", xy=(required, 1.0 if at_top else 0.0),
                        xycoords=("data", "axes fraction"), xytext=(3, -3 if at_top else 3),
                        textcoords="offset points", ha="left",
                        va="top" if at_top else "bottom", fontsize="small", color="0.2",
                        bbox=dict(boxstyle="round,pad=0.15", fc="white", ec="none", alpha=0.8))


def legend_below(ax, first_row, second_row, offset, third_row=None):
    """A frameless legend under `ax` in two rows (three with `third_row`):
    the modes' colours, then the line styles, then bands. Each row is a
    list of (handle, text)."""
    from matplotlib.lines import Line2D

    rows = [first_row, second_row] + ([third_row] if third_row else [])
    columns = max(len(r) for r in rows)
    blank = (Line2D([], [], linestyle="none"), "")
    rows = [r + [blank] * (columns - len(r)) for r in rows]
    entries = [entry for column in zip(*rows) for entry in column]  # column-major
    ax.legend([h for h, _ in entries], [t for _, t in entries], loc="upper center",
              bbox_to_anchor=(0.5, offset), fontsize="small", ncol=columns, frameon=False)


def label_speeds(ax, marks, first_row=0):
    """Text labels near the top of `ax` for (speed, text, colour), one row
    each so that labels at nearby speeds do not overlap; right of the speed,
    or left of it in the right third of the axis. Call after the x limits
    are set."""
    low, high = ax.get_xlim()
    for row, (speed, text, colour) in enumerate(sorted(marks), start=first_row):
        right_side = (speed - low) <= 0.67 * (high - low)
        ax.annotate(text, xy=(speed, 1.0), xycoords=("data", "axes fraction"),
                    xytext=(3 if right_side else -3, -14 - 12 * row),
                    textcoords="offset points", ha="left" if right_side else "right",
                    va="top", fontsize="small", color=colour,
                    bbox=dict(boxstyle="round,pad=0.15", fc="white", ec="none", alpha=0.8))


def shown_speed_range(speed, events, clearance):
    """(low, high, note) of the x axis. A default sweep can run far past
    everything of interest; then the axis ends at 1.5 times the highest of
    the flutter and divergence speeds found and 1.15 V_D, and `note` says
    how far the file goes. note is None when the whole sweep is shown."""
    low, high = float(speed.min()), float(speed.max())
    marks = [v for v in events if v is not None and math.isfinite(v)]
    if clearance is not None:
        marks.append(clearance[1])
    if not marks:
        return low, high, None
    focus = 1.5 * max(marks)
    if focus >= 0.7 * high:
        return low, high, None
    return low, focus, f"speeds shown up to {focus:.4g} m/s; the file holds up to {high:.4g} m/s"


# The damping axis of the V-g figures: the damping ratio zeta of the roots,
# or g = 2 zeta, the structural-damping coefficient a V-g reader may expect
# (the two agree on the sign and on the flutter crossing; g = 2 zeta holds
# for light damping: common practice, no source).
DAMPING_AXES = {
    "ratio": (1.0, r"damping ratio $\zeta$ [1]"),
    "g": (2.0, r"damping $g = 2\zeta$ [1]"),
}


def damping_axis(damping):
    if damping not in DAMPING_AXES:
        raise PlotError(f"damping axis '{damping}' unknown (allowed: {', '.join(DAMPING_AXES)})")
    factor, label = DAMPING_AXES[damping]
    return factor, f"{label}\nnegative damping = unstable"


def plot_vg(f, stem, outdir, speed, reference, labels, damping="ratio"):
    present = [l for l in LINEARISATIONS if l in f and isinstance(f[l], h5py.Group)]
    if not present:
        raise PlotError("flutter file without results (none of the groups "
                        f"{', '.join(LINEARISATIONS)})")
    linearisation = "nominal" if "nominal" in present else present[0]
    methods = [(m, style, name, data) for m, style, name in METHODS
               if (data := method_data(f, linearisation, m, speed.size)) is not None]
    if not methods:
        raise PlotError(f"'{linearisation}' holds neither state_space nor pk results")

    g_factor, g_label = damping_axis(damping)
    fig, (ax_g, ax_f) = plt.subplots(2, 1, sharex=True, figsize=(WIDTH_IN, 7.6),
                                     layout="constrained")
    n_modes = methods[0][3][1].shape[1]
    names = mode_labels(labels, n_modes)
    for method, style, _, (_, ratio, frequency) in methods:
        for k in range(min(n_modes, ratio.shape[1])):
            ax_g.plot(speed, g_factor * ratio[:, k], style, color=f"C{k}", linewidth=1.3)
            ax_f.plot(speed, frequency[:, k], style, color=f"C{k}", linewidth=1.3)
    ax_g.axhline(0.0, color="black", linewidth=0.8, zorder=1)

    labels_at_top = []
    for method, style, name, (group, _, _) in methods:
        v_f = found(group, "flutter")
        if v_f is None:
            continue
        k = int(number_attribute(group, "flutter_mode")) - 1
        colour = f"C{k}" if 0 <= k < n_modes else "black"
        # A large circle (state space) under a small diamond (p-k): both
        # stay visible when the two methods agree.
        marker, size = ("o", 10) if method == "state_space" else ("D", 6)
        ax_g.plot([v_f], [0.0], marker, color=colour, markeredgecolor="black",
                  markersize=size, zorder=5)
        f_f = number_attribute(group, "flutter_frequency")
        if math.isfinite(f_f):
            ax_f.plot([v_f], [f_f], marker, color=colour, markeredgecolor="black",
                      markersize=size, zorder=5)
        prefix = f"flutter ({name})" if len(methods) > 1 else "flutter"
        labels_at_top.append((v_f, f"{prefix} {v_f:.4g} m/s", "black"))

    # Divergence is static: when the methods agree (to 0.5 %), one line.
    divergence = [(found(group, "divergence"), name) for _, _, name, (group, _, _) in methods]
    divergence = [(v, name) for v, name in divergence if v is not None]
    if divergence and all(abs(v - divergence[0][0]) <= 0.005 * divergence[0][0]
                          for v, _ in divergence):
        divergence = [(divergence[0][0], None)]
    for v_d, name in divergence:
        for ax in (ax_g, ax_f):
            ax.axvline(v_d, color="black", linestyle=":", linewidth=1.4, zorder=2)
        prefix = "divergence" if name is None else f"divergence ({name})"
        labels_at_top.append((v_d, f"{prefix} {v_d:.4g} m/s", "black"))
    clearance = clearance_speeds(f)
    low, high, range_note = shown_speed_range(speed, [v for v, _, _ in labels_at_top], clearance)
    ax_f.set_xlim(low, high)
    mark_clearance((ax_g, ax_f), clearance, ax_f, at_top=True)
    if not labels_at_top:
        labels_at_top.append((speed.min(), "no flutter or divergence in the sweep", "black"))
    label_speeds(ax_g, labels_at_top)

    ax_g.set_ylabel(g_label)
    ax_f.set_ylabel("frequency [Hz]")
    ax_f.set_xlabel("true airspeed [m/s]")
    ax_f.set_ylim(bottom=0.0)
    for ax in (ax_g, ax_f):
        ax.grid(True, linewidth=0.4, alpha=0.6)
    add_reduced_speed_axis(ax_g, reference)

    # Legend: one colour per mode, one line style per method.
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    colours = [(Line2D([], [], color=f"C{k}", linewidth=2), names[k]) for k in range(n_modes)]
    styles = [(Line2D([], [], color="black", linestyle=style, linewidth=1.3), name)
              for _, style, name, _ in methods]
    if clearance is not None:
        styles.append((Patch(color="0.85"), r"$V_D$ to $1.15\,V_D$"))
    legend_below(ax_f, colours, styles, -0.14)

    title = text_attribute(f, "title", "") or "aerosect flutter analysis"
    what = "" if linearisation == "nominal" else f" [{linearisation.replace('_', ' ')}]"
    range_note = f"\n({range_note})" if range_note else ""
    ax_g.set_title(f"{title}\nV-g and V-f{what}{range_note}", fontsize="medium")
    footnote(fig, f)
    return save(fig, os.path.join(outdir, f"{stem}_vg.png"))


def observed_lco(f):
    """[(from, to)] true-airspeed ranges where a nonlinear analysis found
    stable limit cycles (the study writes them into its flutter file), and
    their source; ([], None) when the file has none."""
    if "lco_found_from" not in f or "lco_found_to" not in f:
        return [], None
    lo = np.asarray(f["lco_found_from"][()], dtype=float)
    hi = np.asarray(f["lco_found_to"][()], dtype=float)
    return list(zip(lo, hi)), text_attribute(f, "lco_found_source", "")


def plot_vg_gaps(f, stem, outdir, speed, reference, labels, damping="ratio"):
    cases = [("gap_closed", "-", "gap closed"), ("gap_open", "--", "gap open")]
    data = [(name, style, text, method_data(f, name, "state_space", speed.size))
            for name, style, text in cases]
    if any(d is None for _, _, _, d in data):
        return None
    g_factor, g_label = damping_axis(damping)
    fig, ax = plt.subplots(figsize=(WIDTH_IN, 5.4), layout="constrained")
    n_modes = data[0][3][1].shape[1]
    names = mode_labels(labels, n_modes)
    speeds_found = {}
    marks = []
    for name, style, text, (group, ratio, _) in data:
        for k in range(min(n_modes, ratio.shape[1])):
            ax.plot(speed, g_factor * ratio[:, k], style, color=f"C{k}", linewidth=1.3)
        v_f = found(group, "flutter")
        if v_f is not None:
            speeds_found[name] = v_f
            k = int(number_attribute(group, "flutter_mode")) - 1
            ax.plot([v_f], [0.0], "o", color=f"C{k}" if 0 <= k < n_modes else "black",
                    markeredgecolor="black", markersize=7, zorder=5)
            marks.append((v_f, f"flutter ({text}) {v_f:.4g} m/s", "black"))
    ax.axhline(0.0, color="black", linewidth=0.8, zorder=1)

    found_ranges, found_source = observed_lco(f)
    low, high, range_note = shown_speed_range(
        speed, list(speeds_found.values()) + [v for r in found_ranges for v in r], clearance_speeds(f))
    ax.set_xlim(low, high)
    band = None
    if "gap_open" in speeds_found:
        low = speeds_found["gap_open"]
        high = speeds_found.get("gap_closed", speed.max())
        if high < low:
            low, high = high, low
        band = ax.axvspan(low, high, color="tab:orange", alpha=0.18, linewidth=0, zorder=0)
        beyond = "" if "gap_closed" in speeds_found else " (upper end beyond the sweep)"
        ax.annotate(f"linear freeplay bound{beyond}", xy=(0.5 * (low + high), 1.0),
                    xycoords=("data", "axes fraction"), xytext=(0, -4),
                    textcoords="offset points", ha="center", va="top", fontsize="small",
                    color="tab:brown", fontweight="bold")
    # Where stable LCOs were actually found: hatched strips along the
    # bottom (each range at least 0.4 % of the axis wide, to stay visible).
    width = 0.004 * (ax.get_xlim()[1] - ax.get_xlim()[0])
    for lo, hi in found_ranges:
        ax.axvspan(lo - (width if hi - lo < width else 0), hi, ymin=0.0, ymax=0.06, facecolor="none",
                   edgecolor="tab:red", hatch="////", linewidth=0.8, zorder=1)
    mark_clearance((ax,), clearance_speeds(f), ax, at_top=False)
    label_speeds(ax, marks, first_row=1 if band is not None else 0)

    ax.set_xlabel("true airspeed [m/s]")
    ax.set_ylabel(g_label)
    ax.grid(True, linewidth=0.4, alpha=0.6)
    add_reduced_speed_axis(ax, reference)

    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    colours = [(Line2D([], [], color=f"C{k}", linewidth=2), names[k]) for k in range(n_modes)]
    styles = [(Line2D([], [], color="black", linestyle=style, linewidth=1.3),
               f"{text} (state space)") for _, style, text, _ in data]
    bands = []
    if band is not None:
        bands.append((Patch(color="tab:orange", alpha=0.18), "linear freeplay bound"))
    if found_ranges:
        found_text = ", ".join(f"{lo:.4g}..{hi:.4g}" for lo, hi in found_ranges)
        bands.append((Patch(facecolor="none", edgecolor="tab:red", hatch="////"),
                      f"stable LCOs found: {found_text} m/s"))
    legend_below(ax, colours, styles, -0.12, bands)
    title = text_attribute(f, "title", "") or "aerosect flutter analysis"
    range_note = f"\n({range_note})" if range_note else ""
    ax.set_title(f"{title}\nV-g with the freeplay gap open and closed{range_note}",
                 fontsize="medium")
    footnote(fig, f, f"Hatched: stable LCOs found, from {found_source}." if found_source else None)
    return save(fig, os.path.join(outdir, f"{stem}_vg_gaps.png"))


def plot_flutter(f, stem, outdir, damping="ratio"):
    speed, reference, labels = flutter_axes(f)
    written = [plot_vg(f, stem, outdir, speed, reference, labels, damping)]
    gaps = plot_vg_gaps(f, stem, outdir, speed, reference, labels, damping)
    if gaps is not None:
        written.append(gaps)
    return written


CLASS_STYLE = {  # response_class code -> (label, colour)
    0: ("decayed", "0.6"),
    1: ("periodic LCO", "C0"),
    2: ("non-periodic", "C1"),
    3: ("divergent", "C3"),
    4: ("failed", "k"),
    5: ("unsettled (run too short: not an answer)", "C4"),
}
DECAYED, DIVERGENT, FAILED = 0, 3, 4

# Swept case keys -> the quantity's name on an axis; the units are the
# file's own (the `units` of the first swept axis, from the case-file
# reference); keys not listed are shown as they are.
KEY_NAMES = {
    "flow.airspeed": "true airspeed",
    "flow.density": "air density",
    "flow.altitude": "altitude (ISA)",
    "nondimensional.reduced_speed": r"reduced speed $U/(b\,\omega_\alpha)$",
    "nondimensional.mass_ratio": r"mass ratio $\mu$",
    "envelope.dive_speed_eas": "dive speed V_D (EAS)",
}


def key_label(key, units=""):
    """Axis label of a swept key: its name and the units the file gives."""
    name = KEY_NAMES.get(key, key)
    return f"{name} [{pretty_units(units)}]" if units else name


def sweep_tables(f):
    """(key, key units, values, watched, amplitude [dir, n1(, n2)] in display units,
    class table, display unit, factor) of a sweep file."""
    axis = sweep_axes(f)[0]
    key = text_attribute(axis, "key", "value")
    key_units = text_attribute(axis, "units", "")
    values = np.asarray(axis[()], dtype=float)
    watched = text_attribute(f, "watched_dof", "pitch")
    if f"{watched}_amplitude" not in f:
        raise PlotError(f"sweep file without '{watched}_amplitude' (watched_dof = {watched})")
    amplitude = np.asarray(f[f"{watched}_amplitude"][()], dtype=float)
    classes = read_float(f["response_class"])
    if amplitude.shape != classes.shape or amplitude.shape[:2] != (2, values.size):
        raise PlotError(f"'{watched}_amplitude' is {amplitude.shape} and 'response_class' "
                        f"{classes.shape}, not (direction, {key}[, second key]) = (2, {values.size}...)")
    factor, unit = (1000.0, "mm") if watched == "plunge" else (180.0 / math.pi, "deg")
    return key, key_units, values, watched, amplitude * factor, classes, unit, factor


def amplitude_top(amplitude, classes, prediction=None):
    """Upper y limit: the largest amplitude of the runs that did not diverge
    (a divergent run's amplitude is where the run was stopped, not an LCO),
    at least three times the smallest predicted LCO amplitude."""
    kept = amplitude[(classes != DIVERGENT) & (classes != FAILED) & np.isfinite(amplitude)]
    top = float(np.max(kept)) if kept.size else 0.0
    if prediction is not None and np.any(np.isfinite(prediction)):
        top = max(top, 3.0 * float(np.nanmin(prediction)))
    if not top > 0:
        finite = amplitude[np.isfinite(amplitude)]
        top = float(np.max(finite)) if finite.size and np.max(finite) > 0 else 1.0
    return 1.15 * top


def mark_divergent(ax, x, sel, colour, filled, top):
    """Divergent runs as triangles on the top edge (their amplitude is off scale)."""
    if np.any(sel):
        ax.plot(x[sel], np.full(np.count_nonzero(sel), top), "^", ms=8 if filled else 10,
                mfc=colour if filled else "none", mec=colour, ls="none", clip_on=False,
                zorder=6)


def flutter_lines(f, ax):
    """The linear flutter speeds of the case as vertical lines, [(handle,
    text)] for the legend; speeds outside the x limits only in the legend."""
    from matplotlib.lines import Line2D

    entries = []
    for name, label, style in (("gap_open_flutter_value", "flutter, gap open", ":"),
                               ("gap_closed_flutter_value", "flutter, gap closed", "-."),
                               ("linear_flutter_value", "linear flutter", "-.")):
        if name not in f.attrs:
            continue
        if name == "linear_flutter_value" and "gap_closed_flutter_value" in f.attrs:
            continue  # the same speed when the spring is a freeplay
        value = float(f.attrs[name])
        low, high = ax.get_xlim()
        if not low <= value <= high:  # call after the x limits are set
            where = "below" if value < low else "above"
            entries.append((Line2D([], [], ls=style, color="C2", lw=1.3),
                            f"{label} {value:.4g} ({where} the sweep)"))
            continue
        line = ax.axvline(value, ls=style, color="C2", lw=1.3)
        ax.annotate(f"{value:.4g}", xy=(value, 0.0), xycoords=("data", "axes fraction"),
                    xytext=(3, 3), textcoords="offset points", fontsize="small", color="C2")
        entries.append((line, f"{label} {value:.4g}"))
    return entries


def prediction_segments(value, amplitude, stable, branch):
    """The describing-function curves as lines: [(x, y, stable)], one per
    run of equal stability along each branch. A branch is one connected
    curve whose points the file lists in order along it, so each run is
    drawn as listed (never re-sorted: a branch may turn back in amplitude)
    and shares its last point with the next run, so the curve stays
    continuous through a change of stability."""
    value, amplitude = np.asarray(value, dtype=float), np.asarray(amplitude, dtype=float)
    stable, branch = np.asarray(stable, dtype=float) > 0.5, np.asarray(branch, dtype=float)
    segments = []
    for b in np.unique(branch):
        sel = np.nonzero(branch == b)[0]
        start = 0
        for i in range(1, len(sel) + 1):
            if i == len(sel) or stable[sel[i]] != stable[sel[start]]:
                run = sel[start:min(i + 1, len(sel))]
                segments.append((value[run], amplitude[run], bool(stable[sel[start]])))
                start = i
    return segments


def plot_sweep(f, stem, outdir):
    """Bifurcation diagram: LCO amplitude of the watched DOF against the
    first swept value, sweep up (filled markers, solid line) and down (open
    markers, dashed line). One sweep key: colour by response class, with the
    describing-function LCO curve and the linear flutter speeds overlaid.
    Two keys: one colour per second-key value (at most six, evenly picked)."""
    from matplotlib.lines import Line2D

    key, key_units, values, watched, amplitude, classes, unit, factor = sweep_tables(f)
    two_keys = amplitude.ndim == 3
    prediction = None
    if not two_keys and "lco_prediction" in f:
        g = f["lco_prediction"]
        prediction = (np.asarray(g["value"][()], dtype=float),
                      np.asarray(g["amplitude"][()], dtype=float) * factor,
                      np.asarray(g["stable"][()], dtype=float),
                      np.asarray(g["branch"][()], dtype=float) if "branch" in g
                      else np.zeros(len(g["value"])))
    top = amplitude_top(np.where(classes == DECAYED, 0.0, amplitude), classes,
                        None if prediction is None else prediction[1])

    fig, ax = plt.subplots(figsize=(WIDTH_IN, 6.0), layout="constrained")
    entries = []
    directions = (("up", "o", "-", True), ("down", "s", "--", False))
    if not two_keys:
        for d, (name, marker, style, filled) in enumerate(directions):
            # A decayed run has no LCO: drawn at zero, not at the amplitude
            # its motion had when the run ended.
            amp, cls = np.where(classes[d] == DECAYED, 0.0, amplitude[d]), classes[d]
            if not np.any(np.isfinite(cls)):
                continue
            kept = np.where((cls != DIVERGENT) & (cls != FAILED), amp, np.nan)
            ax.plot(values, kept, style, color="0.55", lw=0.8, zorder=2)
            for code, (label, colour) in CLASS_STYLE.items():
                sel = cls == code
                if code == DIVERGENT:
                    mark_divergent(ax, values, sel, colour, filled, top)
                elif np.any(sel):
                    ax.plot(values[sel], amp[sel], marker, ms=6 if filled else 9,
                            mfc=colour if filled else "none", mec=colour, ls="none", zorder=4)
        present = [code for code in CLASS_STYLE if np.any(classes == code)]
        for code in present:
            label, colour = CLASS_STYLE[code]
            shape = "^" if code == DIVERGENT else "o"
            text = ("divergent (off scale, at the top)" if code == DIVERGENT
                    else "decayed (no LCO: drawn at zero)" if code == DECAYED else label)
            entries.append((Line2D([], [], marker=shape, color=colour, ls="none", ms=7), text))
        if prediction is not None:
            for xs, ys, is_stable in prediction_segments(*prediction):
                ax.plot(xs, ys, "-" if is_stable else "--", color="black", lw=1.4, zorder=3)
            entries.append((Line2D([], [], color="black", lw=1.4), "describing function, stable"))
            entries.append((Line2D([], [], color="black", lw=1.4, ls="--"),
                            "describing function, unstable"))
        note = None
    else:
        axes = sweep_axes(f)
        second = axes[1] if len(axes) > 1 else None
        key_2 = text_attribute(second, "key", "value 2") if second is not None else "value 2"
        units_2 = text_attribute(second, "units", "") if second is not None else ""
        units_2 = "" if units_2 in ("", "1") else " " + units_2
        values_2 = (np.asarray(second[()], dtype=float) if second is not None
                    else np.arange(amplitude.shape[2], dtype=float))
        n2 = amplitude.shape[2]
        picked = sorted(set(np.linspace(0, n2 - 1, min(n2, 6)).round().astype(int)))
        colours = plt.get_cmap("viridis")(np.linspace(0.0, 0.85, len(picked)))
        for colour, j in zip(colours, picked):
            for d, (name, marker, style, filled) in enumerate(directions):
                cls = classes[d, :, j]
                amp = np.where(cls == DECAYED, 0.0, amplitude[d, :, j])
                if not np.any(np.isfinite(cls)):
                    continue
                ok = (cls != DIVERGENT) & (cls != FAILED)
                ax.plot(values, np.where(ok, amp, np.nan), style, color=colour, lw=1.1,
                        marker=marker, ms=5 if filled else 7,
                        mfc=colour if filled else "none", mec=colour, zorder=4)
                mark_divergent(ax, values, cls == DIVERGENT, colour, filled, top)
            entries.append((Line2D([], [], color=colour, lw=2), f"{key_2} = {values_2[j]:.4g}{units_2}"))
        if np.any(classes == DIVERGENT):
            entries.append((Line2D([], [], marker="^", color="0.3", ls="none", ms=7),
                            "divergent (off scale, at the top)"))
        shown = "" if len(picked) == n2 else f"; {len(picked)} of the {n2} values of {key_2} shown"
        note = ("Two-key sweep: markers are every run's amplitude whatever its class "
                f"(decayed runs at zero: no LCO){shown}. The describing-function curve and the "
                "flutter speeds are for the case as given, so they are not drawn.")
    entries.append((Line2D([], [], color="0.3", marker="o", ls="-", ms=6), "sweep up (filled)"))
    entries.append((Line2D([], [], color="0.3", marker="s", ls="--", mfc="none", ms=8),
                    "sweep down (open)"))

    ax.set_ylim(bottom=0, top=top)
    ax.set_xlim(values.min() - 0.03 * np.ptp(values), values.max() + 0.03 * np.ptp(values))
    if not two_keys:
        entries += flutter_lines(f, ax)
    ax.set_xlabel(key_label(key, key_units))
    ax.set_ylabel(f"{watched} LCO amplitude [{unit}]\n(half peak-to-peak)")
    ax.set_title(figure_title(f) + "\nLCO amplitude against " + key_label(key),
                 fontsize="medium")
    ax.grid(True, alpha=0.4)
    ax.legend([h for h, _ in entries], [t for _, t in entries], loc="upper center",
              bbox_to_anchor=(0.5, -0.12), fontsize="small", ncol=3, frameon=False)
    footnote(fig, f, note)
    return [save(fig, os.path.join(outdir, f"{stem}_bifurcation.png"))]


# --- gust gradient sweep ---------------------------------------------------

FEET = 0.3048  # m per international foot (exact, by definition)
GUST_CHANNELS = (  # (channel, panel column): displacements left, loads right
    ("plunge", 0), ("pitch", 0), ("flap", 0),
    ("lift", 1), ("pitching_moment", 1), ("hinge_moment", 1),
)


def parameter(f, name, group="parameters/si"):
    """A scalar of the parameters group as float, or NaN."""
    path = f"{group}/{name}"
    if path not in f:
        return math.nan
    try:
        return float(np.asarray(f[path][()]).reshape(-1)[0])
    except (TypeError, ValueError, IndexError):
        return math.nan


def flight_condition(f):
    """'altitude 1500 m (ISA), true airspeed 60 m/s (EAS 55.8 m/s), density ...'
    from the parameters group; the parts that are known."""
    parts = []
    altitude = parameter(f, "altitude")
    if math.isfinite(altitude):
        parts.append(f"altitude {altitude:.6g} m (ISA)")
    speed = parameter(f, "airspeed")
    density = parameter(f, "density")
    if math.isfinite(speed):
        text = f"true airspeed {speed:.4g} m/s"
        if math.isfinite(density) and density > 0:
            text += f" (EAS {speed * math.sqrt(density / SEA_LEVEL_DENSITY):.4g} m/s)"
        parts.append(text)
    if math.isfinite(density):
        parts.append(f"density {density:.4g} kg/m$^3$")
    return ", ".join(parts)


def initial_conditions_note(f):
    """A warning when the case starts away from rest: the sweep's peaks then
    hold the release transient too. Read from the file's `initial_state`
    attribute ("rest", or the displacements and velocities that are not
    zero); None when it starts at rest or the file does not say."""
    state = text_attribute(f, "initial_state", "rest")
    if not state or state == "rest":
        return None
    return ("The case starts away from rest (initial " + state + "): "
            "the peaks include the release transient, not only the gust response.")


def plot_gust_sweep(f, stem, outdir):
    """Peak responses to the one-minus-cosine gusts against the gust gradient
    H: largest and smallest value of each channel, the critical H (largest
    magnitude) starred; U_ds against H on top when it varies with H."""
    if "gradient" not in f or "peaks" not in f:
        raise PlotError("gust sweep file without 'gradient' and 'peaks' (no gradients were run?)")
    gradient = np.asarray(f["gradient"][()], dtype=float)
    if gradient.ndim != 1 or gradient.size == 0:
        raise PlotError("gust sweep file with an empty or malformed 'gradient' axis")
    peaks = f["peaks"]
    channels = []
    for name, column in GUST_CHANNELS:
        high = series(peaks, f"{name}_max", separator="\n")
        low = series(peaks, f"{name}_min", separator="\n")
        if high is None and low is None:
            continue
        label = (high or low)[1].replace(" max", "")
        channels.append((name, column, high, low, signed_label(label, name)))
    if not channels:
        raise PlotError("gust sweep file without peaks of plunge, pitch, flap, lift or moments")
    for name, _, high, low, _ in channels:
        for s_ in (high, low):
            if s_ is not None and s_[0].shape != gradient.shape:
                raise PlotError(f"'peaks/{name}' has {s_[0].shape}, not one value per gradient "
                                f"({gradient.size})")

    design = series(f, "design_velocity", convert=False)
    design_panel = None
    if design is not None and design[0].shape == gradient.shape and np.any(np.isfinite(design[0])):
        finite = design[0][np.isfinite(design[0])]
        if np.ptp(finite) > 1e-9 * max(1.0, np.max(np.abs(finite))):
            design_panel = design[0]
        constant_design = None if design_panel is not None else float(finite[0])
    else:
        constant_design = None

    columns = [[c for c in channels if c[1] == k] for k in (0, 1)]
    columns = [c for c in columns if c]
    rows = max(len(c) for c in columns)
    mosaic = [[f"{k}.{r}" if r < len(columns[k]) else "." for k in range(len(columns))]
              for r in range(rows)]
    if design_panel is not None:
        mosaic.insert(0, ["design"] * len(columns))
    height = 1.5 + 2.0 * rows + (1.6 if design_panel is not None else 0.0)
    fig, axes = plt.subplot_mosaic(mosaic, sharex=True, figsize=(WIDTH_IN, height),
                                   layout="constrained",
                                   height_ratios=([0.8] if design_panel is not None else [])
                                   + [1.0] * rows)

    feet_axis_on = set()
    if design_panel is not None:
        ax = axes["design"]
        ax.plot(gradient, design_panel, "o-", color="tab:purple", markersize=4, linewidth=1.2)
        ax.set_ylabel("$U_{ds}$ TAS\n[m s$^{-1}$]")
        ax.set_title("design gust velocity (first gust)", fontsize="small")
        ax.grid(True, linewidth=0.4, alpha=0.6)
        feet_axis_on.add("design")
    for k, column in enumerate(columns):
        for r, (name, _, high, low, label) in enumerate(column):
            key = f"{k}.{r}"
            ax = axes[key]
            if r == 0 and design_panel is None:
                feet_axis_on.add(key)
            for values_label, style, marker in ((high, "-", "^"), (low, "--", "v")):
                if values_label is not None:
                    ax.plot(gradient, values_label[0], style, marker=marker, color="C0",
                            markersize=4, linewidth=1.1)
            ax.axhline(0.0, color="black", linewidth=0.6)
            ax.set_ylabel(label)
            ax.grid(True, linewidth=0.4, alpha=0.6)
            # The critical H of this channel: the largest magnitude of the
            # values plotted (the file's own critical_gradient_* attribute
            # when present, which is the same choice made by the sweep).
            critical_h = number_attribute(peaks, f"critical_gradient_{name}")
            both = np.vstack([s_[0] for s_ in (high, low) if s_ is not None])
            if not np.any(np.isfinite(both)):
                continue
            row, index = np.unravel_index(np.nanargmax(np.abs(both)), both.shape)
            if math.isfinite(critical_h):
                index = int(np.argmin(np.abs(gradient - critical_h)))
                row = int(np.nanargmax(np.abs(both[:, index])))
            h_star, v_star = gradient[index], both[row, index]
            ax.axvline(h_star, color="tab:red", linestyle=":", linewidth=1.1)
            ax.plot([h_star], [v_star], "*", color="tab:red", markersize=13,
                    markeredgecolor="black", zorder=5)
            # The label at the end of the line away from the star.
            low_y, high_y = ax.get_ylim()
            at_top = v_star < 0.5 * (low_y + high_y)
            right = h_star <= gradient.min() + 0.6 * np.ptp(gradient)
            ax.annotate(f"H = {h_star:.4g} m", xy=(h_star, 1.0 if at_top else 0.0),
                        xycoords=("data", "axes fraction"),
                        xytext=(4 if right else -4, -3 if at_top else 3),
                        textcoords="offset points", ha="left" if right else "right",
                        va="top" if at_top else "bottom", fontsize="small", color="tab:red",
                        bbox=dict(boxstyle="round,pad=0.15", fc="white", ec="none", alpha=0.8))
        axes[f"{k}.{len(column) - 1}"].set_xlabel("gust gradient H [m]")
        axes[f"{k}.{len(column) - 1}"].xaxis.set_tick_params(labelbottom=True)
    for key in feet_axis_on:
        top = axes[key].secondary_xaxis("top", functions=(lambda h: h / FEET, lambda ft: ft * FEET))
        top.set_xlabel("H [ft]", fontsize="small")
        top.tick_params(labelsize="small")
    margin = 0.03 * max(np.ptp(gradient), 1e-3 * max(abs(gradient[0]), 1.0))
    axes["0.0"].set_xlim(gradient.min() - margin, gradient.max() + margin)

    from matplotlib.lines import Line2D

    handles = [Line2D([], [], color="C0", linestyle="-", marker="^", markersize=4),
               Line2D([], [], color="C0", linestyle="--", marker="v", markersize=4),
               Line2D([], [], color="tab:red", linestyle=":", marker="*", markersize=11,
                      markeredgecolor="black")]
    texts = ["largest value", "smallest value", "critical H (largest magnitude)"]
    title = text_attribute(f, "title", "") or "aerosect gust sweep"
    caption = ["one-minus-cosine gust, velocity up at the leading edge; "
               "peaks over each run against the gust gradient H (gust length 2H)"]
    condition = flight_condition(f)
    if condition:
        caption.append(condition)
    if constant_design is not None:
        caption.append(f"design gust velocity {constant_design:.4g} m/s TAS at every H")
    if text_attribute(f, "gust_1_design", "") == "cs-23":
        caption.append("U_de of the small-aircraft rule (design = cs-23): values recalled from memory, "
                       "check them against the rule's text")
    fig.suptitle(title + "\n" + "\n".join(caption), fontsize="small")

    # Under the axes, kept clear by the layout: the legend, then the small
    # print (the initial-conditions note and the file's caution).
    small_print = " ".join(t for t in (initial_conditions_note(f),
                                       text_attribute(f, "caution", "")) if t)
    lines = textwrap.wrap(small_print, 140)
    print_in = 0.06 + 0.13 * len(lines) if lines else 0.0
    legend_in = 0.35
    bottom = (print_in + legend_in) / height
    fig.get_layout_engine().set(rect=(0, bottom, 1, 1 - bottom))
    fig.legend(handles, texts, loc="lower center", bbox_to_anchor=(0.5, print_in / height),
               ncol=3, fontsize="small", frameon=False)
    if lines:
        fig.text(0.01, 0.005, "\n".join(lines), fontsize="x-small", color="0.35", ha="left",
                 va="bottom")
    return [save(fig, os.path.join(outdir, f"{stem}_gust_peaks.png"))]


# --- orbit branch (continued limit cycles) ---------------------------------

BIFURCATION_STYLE = {  # bifurcation_kind code -> (label, marker, colour)
    1: ("fold", "D", "C3"),
    2: ("period doubling", "v", "C1"),
    3: ("torus (Neimark-Sacker)", "s", "C4"),
    4: ("branch point", "X", "C5"),
    5: ("grazing (branch end)", "o", "0.3"),
}
PERIODIC = 1  # response_class of a periodic sweep run


def overlay_sweep(f, path, watched, factor):
    """(value, amplitude in display units, direction) of the periodic runs of
    the sweep file the branch file names, or (None, reason)."""
    name = text_attribute(f, "overlay_sweep_file")
    if not name:
        return None, None
    full = os.path.join(os.path.dirname(os.path.abspath(path)), name)
    if not os.path.exists(full):
        return None, f"sweep file {name} not found beside the branch file"
    with h5py.File(full, "r") as g:
        _, _, values, sw_watched, amplitude, classes, _, sw_factor = sweep_tables(g)
    if amplitude.ndim != 2:
        return None, f"{name} sweeps two keys: its points are not drawn"
    if sw_watched != watched:
        return None, f"{name} watches {sw_watched}, the branch {watched}: its points are not drawn"
    points = []
    for d in (0, 1):
        sel = classes[d] == PERIODIC
        points.append((values[sel], amplitude[d][sel] / sw_factor * factor))
    return points, None


def plot_branch(f, stem, outdir):
    """Bifurcation diagram of an orbit branch: amplitude of the watched DOF
    against the continuation key, stable orbits solid and unstable dashed,
    bifurcations marked (folds, period doubling, torus, branch points,
    grazing ends), V_D and 1.15 V_D marked when the key is the airspeed,
    and the periodic runs of the sweep file it names (overlay_sweep_file)
    drawn over it (decayed and other runs are not LCOs and are not drawn)."""
    from matplotlib.lines import Line2D

    for name in ("parameter", "stable"):
        if name not in f:
            raise PlotError(f"branch file without '{name}' (no orbit was found: "
                            f"{text_attribute(f, 'stop_reason', 'no reason recorded')})")
    key = text_attribute(f, "parameter_key", "parameter")
    key_units = text_attribute(f["parameter"], "units", "")
    key_units = "" if key_units == "1" else key_units
    watched = text_attribute(f, "watched_dof", "pitch")
    if f"{watched}_amplitude" not in f:
        raise PlotError(f"branch file without '{watched}_amplitude'")
    x = np.asarray(f["parameter"][()], dtype=float)
    if x.size < 2:
        return []  # one orbit (the study's lco_orbit.h5) has no diagram
    stable = np.asarray(f["stable"][()], dtype=float) > 0.5
    factor, unit = (1000.0, "mm") if watched == "plunge" else (180.0 / math.pi, "deg")
    a = np.asarray(f[f"{watched}_amplitude"][()], dtype=float) * factor

    overlay, note = overlay_sweep(f, f.filename, watched, factor)
    clearance = clearance_speeds(f) if key == "flow.airspeed" else None
    low, high = float(np.min(x)), float(np.max(x))
    pad = 0.04 * max(high - low, 1e-12 * max(abs(high), 1.0))
    full = (low - pad, high + pad)
    if clearance is not None:
        full = (min(full[0], clearance[0]), max(full[1], 1.03 * clearance[1]))
    # When the marks stretch the axis so that the branch fills less than
    # 40 % of it, a second panel below shows the branch alone.
    zoom = (high - low) < 0.4 * (full[1] - full[0])
    fig, axes = plt.subplots(2 if zoom else 1, 1, figsize=(WIDTH_IN, 9.0 if zoom else 6.0),
                             layout="constrained", squeeze=False)
    axes = axes[:, 0]

    def draw(ax, marks=True):
        entries = []
        # Runs of one stability, each drawn through the first point of the
        # next run so that the curve is unbroken where the stability changes.
        start = 0
        for i in range(1, len(x) + 1):
            if i == len(x) or stable[i] != stable[start]:
                end = min(i + 1, len(x))
                ax.plot(x[start:end], a[start:end], "-" if stable[start] else "--", color="C0",
                        lw=1.8, zorder=3)
                start = i
        entries.append((Line2D([], [], color="C0", lw=1.8), "stable LCO (converged orbit)"))
        if not stable.all():
            entries.append((Line2D([], [], color="C0", lw=1.8, ls="--"), "unstable cycle"))
        if "bifurcation_kind" in f:
            kinds = np.asarray(f["bifurcation_kind"][()], dtype=float)
            bx = np.asarray(f["bifurcation_parameter"][()], dtype=float)
            ba = np.asarray(f["bifurcation_amplitude"][()], dtype=float) * factor
            for code, (label, marker, colour) in BIFURCATION_STYLE.items():
                sel = kinds == code
                if np.any(sel):
                    ax.plot(bx[sel], ba[sel], marker, ms=8, color=colour, mec="black", mew=0.6,
                            ls="none", zorder=5)
                    entries.append((Line2D([], [], marker=marker, color=colour, mec="black",
                                           ls="none", ms=8), label))
        if overlay is not None:
            for (vx, va), marker, filled, text in zip(overlay, ("o", "s"), (True, False),
                                                      ("sweep up, periodic runs",
                                                       "sweep down, periodic runs")):
                if vx.size:
                    colour = "0.45" if filled else "none"
                    ax.plot(vx, va, marker, ms=6 if filled else 9, mfc=colour, mec="0.45",
                            ls="none", zorder=4)
                    entries.append((Line2D([], [], marker=marker, ms=7, mfc=colour, mec="0.45",
                                           ls="none"), text))
        if clearance is not None and marks:
            dive, required = clearance
            ax.axvline(dive, color="0.3", ls=":", lw=1.2, zorder=1)
            mark_clearance([ax], clearance, ax, at_top=True)
            ax.annotate(r"$V_D$", xy=(dive, 1.0), xycoords=("data", "axes fraction"),
                        xytext=(-3, -3), textcoords="offset points", ha="right", va="top",
                        fontsize="small", color="0.2")
            entries.append((Line2D([], [], color="0.3", ls=":"), f"V_D {dive:.4g} m/s TAS"))
            entries.append((Line2D([], [], color="0.3", ls="-."),
                            f"1.15 V_D {required:.4g} m/s TAS"))
        ax.set_xlabel(key_label(key, key_units))
        ax.set_ylabel(f"{watched} LCO amplitude [{unit}]\n(half peak-to-peak)")
        ax.grid(True, alpha=0.4)
        return entries

    entries = draw(axes[0])
    axes[0].set_xlim(*full)
    axes[0].set_ylim(bottom=0, top=1.15 * max(float(np.nanmax(a)), 1e-300))
    axes[0].set_title(figure_title(f) + "\nlimit cycles against " + key_label(key) +
                      " (converged orbits, Floquet stability)", fontsize="medium")
    if zoom:
        # V_D and 1.15 V_D lie outside the enlarged branch (their labels
        # would stretch the layout): marked in the upper panel only.
        draw(axes[1], marks=clearance is not None and low - pad <= clearance[0] <= high + pad)
        axes[1].set_xlim(low - pad, high + pad)
        span = float(np.nanmax(a) - np.nanmin(a))
        margin = 0.08 * span if span > 0 else 0.05 * float(np.nanmax(a))
        axes[1].set_ylim(float(np.nanmin(a)) - margin, float(np.nanmax(a)) + margin)
        axes[1].set_title("the branch enlarged", fontsize="small")
    # Under the axes, kept clear by the layout: the legend, then the small
    # print (a note on the overlay and the file's caution).
    height = fig.get_size_inches()[1]
    lines = textwrap.wrap(" ".join(t for t in (note, text_attribute(f, "caution", "")) if t), 140)
    print_in = 0.06 + 0.13 * len(lines) if lines else 0.0
    legend_in = 0.2 * math.ceil(len(entries) / 3) + 0.1
    bottom = (print_in + legend_in) / height
    fig.get_layout_engine().set(rect=(0, bottom, 1, 1 - bottom))
    fig.legend([h for h, _ in entries], [t for _, t in entries], loc="lower center",
               bbox_to_anchor=(0.5, print_in / height), ncol=3, fontsize="small", frameon=False)
    if lines:
        fig.text(0.01, 0.005, "\n".join(lines), fontsize="x-small", color="0.35", ha="left",
                 va="bottom")
    return [save(fig, os.path.join(outdir, f"{stem}_branch.png"))]


PLOTTERS = {
    "simulation": plot_simulation,
    "flutter": plot_flutter,
    "sweep": plot_sweep,
    "gust-sweep": plot_gust_sweep,
    "orbit_branch": plot_branch,
}


def plot_file(path, outdir=None, damping="ratio"):
    """Every figure of the aerosect result file `path` (its kind read from its
    own `aerosect_file_kind` attribute) into `outdir` (default: the file's
    directory), named after the file's stem; returns the paths written.
    `damping` is the V-g figures' damping axis: "ratio" (zeta) or "g"
    (2 zeta). Raises PlotError for a file it cannot plot, OSError for one
    h5py cannot read."""
    damping_axis(damping)
    outdir = outdir or os.path.dirname(os.path.abspath(path))
    stem = os.path.splitext(os.path.basename(path))[0]
    with h5py.File(path, "r") as f:
        kind = text_attribute(f, "aerosect_file_kind")
        if kind is None:
            raise PlotError("not an aerosect result file (no aerosect_file_kind attribute)")
        plotter = PLOTTERS.get(kind)
        if plotter is None:
            raise PlotError(f"no plots for files of kind '{kind}' "
                            f"(known: {', '.join(sorted(PLOTTERS))})")
        os.makedirs(outdir, exist_ok=True)
        if plotter is plot_flutter:
            return plotter(f, stem, outdir, damping)
        return plotter(f, stem, outdir)


def main(argv):
    parser = argparse.ArgumentParser(prog="plot", description="Plot an aerosect result file.")
    parser.add_argument("file", help="aerosect HDF5 result file")
    parser.add_argument("-o", "--outdir", help="directory for the PNG files "
                        "(default: the directory of FILE)")
    parser.add_argument("--damping", choices=sorted(DAMPING_AXES), default="ratio",
                        help="damping axis of the V-g figures: the damping ratio zeta (default) "
                        "or g = 2 zeta")
    args = parser.parse_args(argv)
    try:
        paths = plot_file(args.file, args.outdir, args.damping)
    except PlotError as e:
        print(f"plot: {args.file}: {e}", file=sys.stderr)
        return 2
    except OSError as e:
        print(f"plot: {args.file}: cannot read it as HDF5: {e}", file=sys.stderr)
        return 2
    for path in paths:
        print(path)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))

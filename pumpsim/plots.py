"""Figures for ``size``, ``compare`` and ``scan`` (PNG, SVG or PDF).

Drawn with matplotlib's object interface on the non-interactive Agg canvas:
no window, no GUI toolkit, nothing global changed, so the engine stays free
of Qt. Each figure says what it shows without the terminal output beside
it: axes with units, the operating point, the target contour, the limits,
and the laser cautions wherever a power appears.
"""

import textwrap
from pathlib import Path

import numpy as np

from .errors import InputError
from .lines import line

FORMATS = (".png", ".svg", ".pdf")
DPI = 150


def check_path(path, file=None):
    """Reject a plot file name that is not PNG, SVG or PDF (``file``: the setup, for
    the message)."""
    if Path(path).suffix.lower() not in FORMATS:
        raise InputError(f"plot files end in {', '.join(FORMATS)}; got {str(path)!r}",
                         file, "--plot")


def _figure(size):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=size, layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def _footer(fig, lines, cautions=()):
    text = [textwrap.fill(s, 150) for s in lines]
    text += [textwrap.fill("CAUTION: " + c, 150) for c in cautions]
    if text:
        fig.get_layout_engine().set(h_pad=0.1)
        fig.supxlabel("\n".join(text), fontsize=6.5, ha="left", x=0.01, multialignment="left")


def _save(fig, path):
    fig.savefig(path, dpi=DPI)


def _tick_text(v):
    """``0.2``, ``5``, ``2000``; from 10^4 up (and below 10^-3) a power of ten."""
    if v <= 0:
        return ""
    if 1e-3 <= v < 1e4:
        return f"{v:g}"
    e = np.log10(v)
    if abs(e - round(e)) < 1e-9:
        return f"$10^{{{int(round(e))}}}$"
    m = v / 10.0 ** np.floor(e)
    return f"${m:.2g}\\times10^{{{int(np.floor(e))}}}$"


def _plain_log(axis):
    """Log axis with ticks written 0.2, 1, 5 rather than 2 x 10^-1; intermediate
    (2, 5) ticks are labelled only while the axis spans at most two decades, so
    that labels never run into each other."""
    from matplotlib.ticker import FuncFormatter, LogLocator

    def minor(v, _):
        lo, hi = sorted(axis.get_view_interval())
        return _tick_text(v) if lo > 0 and hi / lo <= 150 else ""

    axis.set_major_formatter(FuncFormatter(lambda v, _: _tick_text(v)))
    axis.set_minor_locator(LogLocator(subs=(2, 5)))
    axis.set_minor_formatter(FuncFormatter(minor))


def _legend_below(ax, ncol=1):
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.11), fontsize=7.5, frameon=False,
              ncol=ncol)


def _line_text(setup, beam):
    b = setup.beam(beam)
    ln = line(setup.scheme, b.lower, b.upper)
    return f"beam '{beam}' on {b.lower} → {b.upper} ({ln.wavelength * 1e9:.1f} nm)"


def plot_size(sizing, path):
    """Power x waist-along map at one waist across, with the target contour and the
    operating points that share that waist across (others are listed below it)."""
    check_path(path)
    s, setup, beam, F = sizing.search, sizing.setup, sizing.beam, sizing.target_fraction
    b = setup.beam(beam)
    m = sizing.map
    fig = _figure((8.0, 7.6))
    ax = fig.add_subplot()
    P, W, T = m["power"] * 1e3, m["waist"] * 1e3, m["fraction"]
    across = m["across"]
    mesh = ax.pcolormesh(P, W, T, shading="nearest", cmap="viridis")
    fig.colorbar(mesh, ax=ax, label=f"transfer fraction into '{setup.target}'")
    if T.min() < F < T.max():
        cs = ax.contour(P, W, T, levels=[F], colors="white", linestyles="--", linewidths=1.5)
        ax.clabel(cs, fmt={F: f"F = {F:g}"}, fontsize=8)
    elsewhere = []  # points whose waist across is not the map's: not drawn on it

    def mark(power, waist, waist_across, style, label):
        if abs(waist_across / across - 1) <= 1e-6:
            ax.plot(power * 1e3, waist * 1e3, label=label, **style)
        else:
            elsewhere.append(f"{label} (waist across {waist_across * 1e3:.3g} mm: not on "
                             "this map)")

    j = sizing.joint
    if j is not None:
        bound = [f"{k} at its {v} bound" for k, v in j.at_bound.items() if v]
        mark(j.power, j.waist, j.waist_across,
             dict(marker="*", ls="none", ms=16, mfc="gold", mec="black"),
             f"least power over waists: {j.power * 1e3:.4g} mW at {j.waist * 1e3:.3g} mm "
             f"along (re-simulated {j.outcome.transfer_fraction:.4f})"
             + (f" ({'; '.join(bound)})" if bound else ""))
    if s.reachable and s.power > 0:
        mark(s.power, b.waist, b.waist_across,
             dict(marker="D", ls="none", ms=8, mfc="orange", mec="black"),
             f"least power at the setup's waist: {s.power * 1e3:.4g} mW "
             f"(re-simulated {s.outcome.transfer_fraction:.4f})")
    inside = P[0] <= b.power * 1e3 <= P[-1] and W[0] <= b.waist * 1e3 <= W[-1]
    mark(b.power, b.waist, b.waist_across,
         dict(marker="o", ls="none", ms=8, mfc="none", mec="red", mew=2),
         f"setup: {b.power * 1e3:.4g} mW, waist {b.waist * 1e3:.3g} mm"
         + ("" if inside else " (outside the map)"))
    w = sizing.waist
    if w is not None and (j is None or (w.waist, w.waist_across) != (j.waist, j.waist_across)
                          or w.power != j.power):
        mark(w.power, w.waist, w.waist_across,
             dict(marker="^", ls="none", ms=10, mfc="white", mec="black"),
             f"best waist at {w.power * 1e3:.4g} mW: {w.waist * 1e3:.3g} mm along "
             f"→ {w.outcome.transfer_fraction:.4f}")
    ax.set_xscale("log")
    ax.set_yscale("log")
    _plain_log(ax.xaxis)
    _plain_log(ax.yaxis)
    ax.set_xlim(P[0] / 1.15, P[-1] * 1.15)
    ax.set_ylim(W[0] / 1.1, W[-1] * 1.1)
    ax.set_xlabel(f"power of beam '{beam}' per pass (mW)")
    ax.set_ylabel("waist along the atomic beam, 1/e² radius (mm)")
    ax.set_title(f"{setup.scheme.name}: {_line_text(setup, beam)}\n"
                 f"target '{setup.target}', F = {F:g}; every point of the map and every "
                 f"marker with waist across {across * 1e3:.4g} mm", fontsize=9)
    if ax.get_legend_handles_labels()[0]:
        _legend_below(ax)
    notes = [f"Ceiling at unlimited power, the setup's waist and transit: "
             f"{s.ceiling.transfer_fraction:.4f} (a limit, not a proposed power). "
             f"Branching limit at unlimited power and time: {sizing.limit.fraction:.4f}."]
    notes += ["Also: " + e for e in elsewhere]
    if not s.reachable and j is None:
        notes.insert(0, f"F = {F:g} is NOT REACHABLE: {sizing.reason}")
    if sizing.unconverged:
        notes.append(f"WARNING: {sizing.unconverged} of {sizing.simulations} simulations missed "
                     "the numerical tolerance.")
    _footer(fig, notes, sizing.cautions)
    _save(fig, path)


LINE_STYLES = ("-", "--", "-.", ":")
MARKERS = ("o", "s", "^", "D", "v", "P")


def plot_compare(setup, routes, F, curves, path, rank_by="power"):
    """Transfer fraction against power for each route, the target line and each least power.

    Parameters
    ----------
    setup : Setup
    routes : list of Route
        Ranked, best first.
    F : float
    curves : dict
        Upper level -> ``(powers W, fractions)``, sorted by power.
    path : str or Path
    rank_by : str
        How the routes were ranked (a key of :data:`pumpsim.routes.RANK_BY`).
    """
    check_path(path)
    from .routes import RANK_BY, all_cautions

    fig = _figure((8.0, 7.0))
    ax = fig.add_subplot()
    beam = routes[0].beam
    n = len(routes)
    for rank, r in enumerate(routes, 1):
        p, t = curves[r.upper]
        s = r.search
        tail = (f"{s.power * 1e3:.4g} mW for F" if s.reachable
                else f"F out of reach (ceiling {s.ceiling.transfer_fraction:.3f})")
        # lower ranks drawn on top, thinner, each with its own dash and marker, so
        # that curves and dots that coincide still show
        style = dict(ls=LINE_STYLES[(rank - 1) % len(LINE_STYLES)],
                     marker=MARKERS[(rank - 1) % len(MARKERS)], zorder=2 + rank)
        (ln,) = ax.plot(np.asarray(p) * 1e3, t, lw=1.2 + 1.6 * (n - rank) / max(n - 1, 1),
                        ms=3, **style,
                        label=f"{rank}. {r.lower} → {r.upper}, {r.wavelength * 1e9:.1f} nm, "
                              f"to target {r.branching_target:.2f}, to other "
                              f"{r.branching_other:.2f}: {tail}")
        if s.reachable and s.power > 0:
            ax.plot(s.power * 1e3, s.outcome.transfer_fraction, ls="none",
                    marker=style["marker"], ms=6 + 5 * (n - rank) / max(n - 1, 1),
                    color=ln.get_color(), mec="black", zorder=20 + rank)
    ax.axhline(F, color="0.35", ls="--", lw=1, zorder=1)
    ax.annotate(f"target F = {F:g}", (0.01, F), xycoords=("axes fraction", "data"),
                va="bottom", fontsize=8)
    ax.set_xscale("log")
    ax.set_xlabel(f"power of beam '{beam}' per pass (mW)")
    ax.set_ylabel(f"transfer fraction into '{setup.target}'")
    ax.set_title(f"{setup.scheme.name}: pump routes out of '{routes[0].lower}' for beam "
                 f"'{beam}', ranked best first\n"
                 "large markers: least power for F (re-simulated)\nright end of each curve: "
                 "ceiling at unlimited power (a limit, not a proposed power)", fontsize=9)
    _plain_log(ax.xaxis)
    _legend_below(ax)
    ax.grid(True, which="both", alpha=0.3)
    _footer(fig, [f"Ranking: routes reaching F first, by {RANK_BY[rank_by]}; then by ceiling."],
            all_cautions(routes))
    _save(fig, path)


def plot_profile(result, path, cautions=()):
    """Ensemble-mean populations of every level along z, with each beam's 1/e² extent."""
    check_path(path)
    setup = result.setup
    fig = _figure((8.0, 5.8))
    ax = fig.add_subplot()
    z = result.z * 1e3
    for j, lid in enumerate(result.levels):
        ax.plot(z, result.profile[:, j], lw=2.2 if lid == setup.target else 1.3,
                ls="-" if j < 10 else "--",
                label=f"{lid} (target)" if lid == setup.target else lid)
    for b in setup.beams:
        half = b.waist / np.sin(b.angle) * 1e3
        ax.axvspan(b.position * 1e3 - half, b.position * 1e3 + half, color="0.5", alpha=0.12)
        ax.annotate(f"{b.name}: {b.lower} → {b.upper}, {b.power * 1e3:.4g} mW",
                    (b.position * 1e3, 1.0), xycoords=("data", "axes fraction"), ha="center",
                    va="bottom", fontsize=7.5)
    ax.set_xlabel("position along the atomic beam z (mm)")
    ax.set_ylabel("population (ensemble mean)")
    ax.set_ylim(-0.02, 1.02)
    ax.grid(True, alpha=0.3)
    ax.set_title(f"{setup.scheme.name}: {Path(setup.path or 'setup').name}; transfer into "
                 f"'{setup.target}' {result.transfer_fraction:.4f}\n", fontsize=9)
    _legend_below(ax, ncol=min(len(result.levels), 6))
    _footer(fig, ["Shaded: each beam's 1/e² intensity half-width either side of its centre."],
            cautions)
    _save(fig, path)


def plot_scan(scan, path, F=None):
    """A 1-D scan as a curve, 2-D (or a 2-D slice of more) as a map with the F contour."""
    check_path(path)
    from .scan import current_value, label_of

    setup, axes, T = scan.setup, scan.axes, scan.fraction
    index, sliced = [], []
    for d, a in enumerate(axes):
        if d < 2:
            index.append(slice(None))
            continue
        now = current_value(setup, a.key)
        i = int(np.argmin(np.abs(np.array(a.values) - now))) if now is not None else 0
        index.append(i)
        sliced.append(f"{a.key} = {a.values[i]:g} {a.unit}")
    T = T[tuple(index)]
    fig = _figure((7.5, 5.8))
    ax = fig.add_subplot()
    x = np.array(axes[0].values)
    x_now = current_value(setup, axes[0].key)
    label = f"transfer fraction into '{setup.target}'"
    if len(axes) == 1:
        ax.plot(x, T, "o-", ms=3)
        ax.set_ylabel(label)
        if F is not None:
            ax.axhline(F, color="black", ls="--", lw=1, label=f"target F = {F:g}")
        if x_now is not None:
            ax.axvline(x_now, color="red", lw=1, label=f"setup: {x_now:g} {axes[0].unit}")
        ax.grid(True, alpha=0.3)
    else:
        y = np.array(axes[1].values)
        mesh = ax.pcolormesh(x, y, T.T, shading="nearest", cmap="viridis")
        fig.colorbar(mesh, ax=ax, label=label)
        if F is not None and np.nanmin(T) < F < np.nanmax(T) and min(T.shape) > 1:
            cs = ax.contour(x, y, T.T, levels=[F], colors="white", linestyles="--")
            ax.clabel(cs, fmt={F: f"F = {F:g}"}, fontsize=8)
        y_now = current_value(setup, axes[1].key)
        if x_now is not None and y_now is not None:
            ax.plot(x_now, y_now, "o", ms=8, mfc="none", mec="red", mew=2,
                    label=f"setup: {x_now:g} {axes[0].unit}, {y_now:g} {axes[1].unit}")
        ax.set_ylabel(label_of(setup, axes[1]))
        if axes[1].log:
            ax.set_yscale("log")
            _plain_log(ax.yaxis)
    if axes[0].log:
        ax.set_xscale("log")
        _plain_log(ax.xaxis)
    ax.set_xlabel(label_of(setup, axes[0]))
    if ax.get_legend_handles_labels()[0]:
        _legend_below(ax)
    title = f"{setup.scheme.name}: {Path(setup.path or 'setup').name}, target '{setup.target}'"
    if sliced:
        title += "\nslice at " + ", ".join(sliced)
    ax.set_title(title, fontsize=9)
    shows_power = any(a.key.endswith(".power_mW") for a in axes)
    _footer(fig, [], scan.cautions if shows_power else ())
    _save(fig, path)

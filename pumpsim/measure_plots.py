"""Figures of the measurement half: a fit to measured data and a probe spectrum."""

import numpy as np

from .plots import _figure, _footer, _save


def plot_fit(data, report, path, cautions=()):
    """Data with error bars, the fitted curve and its band (one condition column), and the
    normalized residuals below."""
    from .plots import _figure, _footer, _save

    fig = _figure((8.0, 6.5))
    top, bottom = fig.subplots(2, 1, height_ratios=(3, 1), sharex=data.x.shape[1] == 1)
    pts = report["points"]
    one = data.x.shape[1] == 1
    x = data.x[:, 0] if one else np.arange(1, len(data.y) + 1)
    err = data.sigma if data.sigma is not None else None
    top.errorbar(x, data.y, yerr=err, fmt="o", ms=4, color="black", label="measured")
    if "curve" in report:
        c = report["curve"]
        cx, cy = np.array(c["x"]), np.array(c["model"])
        top.plot(cx, cy, color="tab:blue", label="fitted model")
        if c["band"] is not None:
            b = np.array(c["band"])
            top.fill_between(cx, cy - b, cy + b, color="tab:blue", alpha=0.25,
                             label="±1 standard error of the model")
    else:
        top.plot(x, pts["model"], "s", ms=4, mfc="none", color="tab:blue", label="fitted model")
    top.set_ylabel(data.observable.replace("_", " "))
    if one and x.min() > 0 and x.max() / x.min() > 10:  # conditions spread over decades
        top.set_xscale("log")
    top.legend(fontsize=8)
    bottom.axhline(0, color="gray", lw=0.8)
    bottom.plot(x, pts["normalized_residual"], "o", ms=4, color="tab:red")
    bottom.set_ylabel("(data − model) / σ" if data.sigma is not None else "data − model")
    bottom.set_xlabel(data.keys[0] if one else "row")
    lines = [f"{p['key']} = {p['value']:.6g} ± "
             + (f"{p['stderr']:.2g}" if p["stderr"] is not None else "undetermined")
             for p in report["parameters"]]
    lines.append(f"chi²/dof = {report['chi2_per_dof']:.3g} ({report['dof']} degrees of freedom)")
    top.set_title("; ".join(lines[:-1]), fontsize=8)
    _footer(fig, [lines[-1]] + report["warnings"], cautions)
    _save(fig, path)


def plot_spectrum(spectrum, path, measured=None, cautions=()):
    """Probe signal against probe detuning, pumps on and off, with measured points
    (``(x, y, sigma or None)``) laid over it."""
    fig = _figure((8.0, 5.5))
    ax = fig.subplots()
    x = np.array(spectrum["detuning_MHz"])
    unit = "counts_per_s" if "counts_per_s" in spectrum else "detected_per_atom"
    on, off = np.array(spectrum[unit]), np.array(spectrum[unit + "_pumps_off"])
    ax.plot(x, on, "-o", ms=3, color="tab:blue", label="pumps on (model)")
    ax.plot(x, off, "--", color="tab:gray", label="pumps off (model)")
    if measured is not None:
        mx, my, ms = measured
        ax.errorbar(mx, my, yerr=ms, fmt="o", ms=4, color="black", label="measured")
    ax.set_xlabel(f"probe '{spectrum['probe']}' detuning (MHz)")
    ax.set_ylabel("probe counts per second" if unit == "counts_per_s"
                  else "detected probe photons per atom")
    ax.legend(fontsize=8)
    peak = int(np.argmax(on))
    _footer(fig, [f"largest pump gain {max(spectrum['gain']):.3g}; signal peaks at "
                  f"{x[peak]:g} MHz"], cautions)
    _save(fig, path)

"""What a detector and the next stage see (docs/measurement.md).

* A probe beam's signal: the photons it scatters per atom (the engine's
  per-beam photon count: in the rate equations every net absorption ends in
  one spontaneous emission), times the share of a sphere its collection
  optics see and the detection efficiency. Emission is taken as isotropic
  (common practice for unpolarized fluorescence, no source). With the
  source's flux, counts per second.
* The pump's gain on a probe: the probe signal with the pumps on over the
  signal with every non-probe beam off (flux and collection cancel).
* The next stage: the target population carried by atoms slower than the
  capture speed and, with an aperture, not deflected out of it.

Everything here works on ensemble nodes (speeds, angles, offsets, weights and
per-node values, as :class:`~pumpsim.ensemble.Evaluated` holds them), so that
both an adaptive simulation and a fit's frozen rule (:mod:`pumpsim.frozen`)
give them.
"""

import math

import numpy as np
from scipy.special import ndtr

from .ensemble import EnsembleIntegrator
from .model import RateModel
from .simulate import make_propagator
from .sparse_model import SparseRateModel, solver_for

CAPTURE_PANELS = (4, 8, 16, 32, 64)  # Gauss-Kronrod panels below the capture speed, tried in turn


def probes(setup) -> tuple:
    """The setup's probe beams."""
    return tuple(b for b in setup.beams if b.role == "probe")


def solid_angle(beam) -> float:
    """Collection solid angle, sr: given, or ``2 pi (1 - cos(asin NA))`` from a
    numerical aperture in vacuum (a cone's solid angle, common practice, no source)."""
    if beam.collection_sr is not None:
        return beam.collection_sr
    return 2 * math.pi * (1 - math.sqrt(1 - beam.collection_NA ** 2))


def detected_share(beam) -> float:
    """Detected photons per scattered photon: ``Omega / 4 pi`` times the efficiency."""
    return solid_angle(beam) / (4 * math.pi) * beam.detection_efficiency


def pumps_off(setup):
    """The same setup with every non-probe beam at zero power."""
    for b in setup.beams:
        if b.role != "probe":
            setup = setup.with_value(f"beam.{b.name}.power_mW", 0.0)
    return setup


def engine(setup):
    """The model, propagator and ensemble integrator ``simulate`` would use for ``setup``."""
    solver = solver_for(setup)
    model = (SparseRateModel if solver == "rosenbrock" else RateModel)(setup)
    num = setup.numerics
    prop = make_propagator(num, solver)
    return EnsembleIntegrator(model, prop, num.tolerance, num.max_nodes)


def signals(setup, nodes) -> dict:
    """Probe name -> detected photons per atom, from ensemble nodes (weights summing to 1)."""
    L = len(setup.scheme.ids) + 1
    out = {}
    for i, b in enumerate(setup.beams):
        if b.role == "probe":
            out[b.name] = float(nodes.weight @ nodes.values[:, L + i]) * detected_share(b)
    return out


def acceptance(setup, nodes) -> np.ndarray:
    """Per node, the share of its atoms that pass the next stage's aperture (1 without one).

    An atom leaves the pump at transverse offset ``y0`` and moves off along x by
    ``(a + deflection) D`` at the aperture's distance ``D``; the aperture is a
    circle of radius ``R``. The source's angle distribution is integrated in
    closed form around each node's pump deflection (non-probe beams only), so
    the step at the aperture's edge is exact in angle: each node carries its
    own pumping, but its atoms are spread over the whole divergence."""
    stage = setup.next_stage
    if stage.aperture is None:
        return np.ones(len(nodes.v))
    L, B = len(setup.scheme.ids) + 1, len(setup.beams)
    pump = [i for i, b in enumerate(setup.beams) if b.role != "probe"]
    kick = nodes.values[:, L + B:][:, pump].sum(axis=1)
    half = np.sqrt(np.maximum(stage.aperture ** 2 - nodes.y0 ** 2, 0.0)) / stage.aperture_distance
    sigma = setup.source.divergence_rms
    if sigma == 0:
        return (np.abs(nodes.a + kick) <= half).astype(float)
    return ndtr((half - kick) / sigma) - ndtr((-half - kick) / sigma)


def capture_nodes(setup, z, sizes, panels):
    """Ensemble nodes below the capture speed: ``panels`` equal Gauss-Kronrod panels on
    ``[slowest, capture speed]``, inner rule ``sizes``, grid ``z``. Weights are those of
    the source's flux density (they sum to the captured share of the flux).
    ``None`` when no atom is that slow."""
    ens = engine(setup)
    lo, hi = ens.speeds.support()
    top = min(hi, setup.next_stage.capture_speed)
    if top <= lo:
        return None
    edges = np.linspace(lo, top, panels + 1)
    V, A, Y, WK, _, _ = ens.panel_nodes(list(zip(edges[:-1], edges[1:])), ens.inner_rule(sizes))
    return ens.evaluate(V, A, Y, WK, np.zeros(len(V), dtype=int), 1, z)


def carried(setup, nodes, weight_sum=1.0) -> dict:
    """Target population and atoms passing the aperture, as shares of all atoms, from
    nodes whose weights sum to ``weight_sum`` of the whole flux."""
    t = setup.scheme.index(setup.target)
    acc = acceptance(setup, nodes)
    total = nodes.weight.sum()
    w = nodes.weight * (weight_sum / total if total else 0.0)
    return {"target": float(w @ (nodes.values[:, t] * acc)), "atoms": float(w @ acc),
            "flux_share": float(weight_sum)}


def next_stage_report(setup, result) -> dict:
    """Target population reaching the next stage, as shares of all atoms (see
    :func:`carried`); per second too when the source's flux is known."""
    stage = setup.next_stage
    out = {"transfer_fraction": result.transfer_fraction}
    if stage.aperture is not None:
        through = carried(setup, result.nodes)
        out["passing_aperture_fraction"] = through["atoms"]
        out["target_through_aperture"] = through["target"]
    if stage.capture_speed is not None:
        out["capture_speed_m_s"] = stage.capture_speed
        slow = captured(setup, result)
        out["captured_flux_share"] = slow["flux_share"]
        out["captured_target_fraction"] = slow["target"]
    flux = setup.source.flux
    if flux is not None:
        for key in ("target_through_aperture", "captured_target_fraction"):
            if key in out:
                out[key.replace("_fraction", "") + "_per_s"] = out[key] * flux
    return out


def captured(setup, result) -> dict:
    """:func:`carried` for the atoms slower than the capture speed: Gauss-Kronrod panels
    below it, more of them until the captured target share changes by less than the
    tolerance, on the result's grid and angle and offset rules."""
    v0 = result.nodes.v[0]
    if np.all(result.nodes.v == v0):  # one speed: captured whole or not at all
        return carried(setup, result.nodes, 1.0 if v0 < setup.next_stage.capture_speed else 0.0)
    sizes = {"angle": result.numerics.angle_nodes, "offset": result.numerics.offset_nodes}
    prev = None
    for n in CAPTURE_PANELS:
        ev = capture_nodes(setup, result.z, sizes, n)
        if ev is None:
            return {"target": 0.0, "atoms": 0.0, "flux_share": 0.0}
        now = carried(setup, ev, float(ev.weight.sum()))
        if prev is not None and abs(now["target"] - prev) <= setup.numerics.tolerance:
            break
        prev = now["target"]
    return now


def probe_report(setup, result, result_off) -> dict:
    """Per probe: detected photons per atom with pumps and without, their ratio (the
    gain), and counts per second when the flux is known."""
    on, off = signals(setup, result.nodes), signals(result_off.setup, result_off.nodes)
    flux = setup.source.flux
    out = {}
    for b in probes(setup):
        rec = {"collected_share": detected_share(b), "solid_angle_sr": solid_angle(b),
               "scattered_per_atom": result.photons_per_atom[b.name],
               "detected_per_atom": on[b.name], "detected_per_atom_pumps_off": off[b.name],
               "gain": on[b.name] / off[b.name] if off[b.name] > 0 else math.inf}
        if flux is not None:
            rec["counts_per_s"] = on[b.name] * flux
            rec["counts_per_s_pumps_off"] = off[b.name] * flux
        out[b.name] = rec
    return out


def wants_report(setup) -> bool:
    """Whether the setup asks for a measurement report (a probe or a next stage)."""
    s = setup.next_stage
    return bool(probes(setup)) or s.capture_speed is not None or s.aperture is not None


def measurement_report(result, simulate_fn) -> dict:
    """The ``measurement`` object of ``run --json``: probes (one more simulation, pumps
    off, through ``simulate_fn``) and the next stage."""
    setup = result.setup
    out = {}
    if probes(setup):
        out["probes"] = probe_report(setup, result, simulate_fn(pumps_off(setup)))
    out["next_stage"] = next_stage_report(setup, result)
    return out


def measurement_summary(measured) -> str:
    """Readable lines for ``pumpsim run``."""
    lines = []
    for name, r in measured.get("probes", {}).items():
        lines.append(f"probe '{name}': collects {r['solid_angle_sr']:.3g} sr, detects "
                     f"{r['collected_share']:.3g} of its scattered photons")
        lines.append(f"  detected photons per atom {r['detected_per_atom']:.4g} "
                     f"(pumps off {r['detected_per_atom_pumps_off']:.4g}), "
                     f"gain {r['gain']:.4g}")
        if "counts_per_s" in r:
            lines.append(f"  counts per second {r['counts_per_s']:.4g} "
                         f"(pumps off {r['counts_per_s_pumps_off']:.4g})")
    s = measured["next_stage"]
    if "passing_aperture_fraction" in s:
        lines.append(f"next stage: {s['passing_aperture_fraction']:.4g} of all atoms pass the "
                     f"aperture, carrying target population {s['target_through_aperture']:.4g} "
                     f"per atom (transfer fraction {s['transfer_fraction']:.4g})")
    if "capture_speed_m_s" in s:
        lines.append(f"next stage: {s['captured_flux_share']:.4g} of the atoms are slower than "
                     f"{s['capture_speed_m_s']:g} m/s; they carry target population "
                     f"{s['captured_target_fraction']:.4g} per atom (transfer fraction "
                     f"{s['transfer_fraction']:.4g})")
    for key in ("target_through_aperture_per_s", "captured_target_per_s"):
        if key in s:
            lines.append(f"  {key.replace('_', ' ')}: {s[key]:.4g}")
    return "\n".join(lines)


def spectrum(setup, probe, detunings_MHz, executor):
    """Probe signal against the probe's detuning (MHz), pumps on and off: every
    simulation through ``executor``. Returns the ``pumpsim probe --json`` object."""
    from .executors import run_ordered
    from .outcome import evaluate

    beam = setup.beam(probe)
    on = [setup.with_value(f"beam.{probe}.detuning_MHz", float(d)) for d in detunings_MHz]
    setups = on + [pumps_off(s) for s in on]
    photons = [o.photons_per_atom[probe] for o in run_ordered(executor, evaluate, setups)]
    share = detected_share(beam)
    n = len(on)
    signal = np.array(photons[:n]) * share
    dark = np.array(photons[n:]) * share
    out = {"probe": probe, "detuning_MHz": [float(d) for d in detunings_MHz],
           "detected_per_atom": signal.tolist(), "detected_per_atom_pumps_off": dark.tolist(),
           "gain": np.divide(signal, dark, out=np.full(n, np.inf), where=dark > 0).tolist()}
    if setup.source.flux is not None:
        out["counts_per_s"] = (signal * setup.source.flux).tolist()
        out["counts_per_s_pumps_off"] = (dark * setup.source.flux).tolist()
    return out

"""Independent rate equations for one atom, written from ``model.md`` alone.

Built from the scheme and setup *documents* (file units, as the user writes
them), with its own unit conversions and constants from ``scipy.constants``
(CODATA), so that it shares no code with ``pumpsim``. Time is the variable
(the engine integrates in z); an atom at time ``t`` is at ``z = v t``.

State: level populations in file order, then ``other``, then one photon
counter per pass of each beam (net absorbed photons, the time integral of
``R (N_i - (g_i/g_k) N_k)``).
"""

import math
from dataclasses import dataclass

import numpy as np
from scipy import constants as C
from scipy.integrate import solve_ivp

AMU = C.physical_constants["atomic mass constant"][0]


@dataclass
class Pass:
    lower: int
    upper: int
    ratio: float          # g_i / g_k
    sigma0: float         # m^2
    gamma: float          # angular FWHM, 1/s
    k: float              # 1/m
    omega: float          # rad/s
    peak: float           # W/m^2
    wa: float
    wc: float
    z: float              # beam centre, m
    theta: float          # rad
    delta: float          # Hz
    sign: float           # +1 odd passes, -1 even passes
    beam: int


class ReferenceAtom:
    """Rate equations of one atom of a setup (documents in file units)."""

    def __init__(self, scheme_doc, setup_doc):
        levels = scheme_doc["level"]
        self.ids = [lv["id"] for lv in levels]
        self.L = len(levels)
        energy = {lv["id"]: lv["energy_cm"] for lv in levels}
        g = {lv["id"]: 2 * lv["J"] + 1 for lv in levels}
        life = {lv["id"]: lv.get("lifetime_s") for lv in levels}
        self.mass = scheme_doc["species"]["mass_u"] * AMU
        rates = {}  # (upper, lower) -> A
        for d in scheme_doc.get("decay", []):
            A = d["A_per_s"] if "A_per_s" in d else d["branching"] / life[d["upper"]]
            rates[(d["upper"], d["lower"])] = A
        total = {}
        for lid in self.ids:
            listed = sum(A for (u, _), A in rates.items() if u == lid)
            total[lid] = 1 / life[lid] if life[lid] else listed
        n = self.L + 1
        self.decay = np.zeros((n, n))
        for lid in self.ids:
            k = self.ids.index(lid)
            self.decay[k, k] -= total[lid]
            listed = 0.0
            for (u, lo), A in rates.items():
                if u == lid:
                    self.decay[self.ids.index(lo), k] += A
                    listed += A
            self.decay[self.L, k] += total[lid] - listed
        self.passes = []
        self.beam_names = []
        for bi, b in enumerate(setup_doc.get("beam", [])):
            self.beam_names.append(b["name"])
            lo, up = b["transition"]
            lam = 1.0 / (100.0 * (energy[up] - energy[lo]))  # m, from cm^-1
            gamma = total[up] + total[lo] + 2 * math.pi * b.get("linewidth_MHz", 0.0) * 1e6
            sigma0 = g[up] / g[lo] * lam**2 / (2 * math.pi) * rates[(up, lo)] / gamma
            wa = b["waist_mm"] * 1e-3
            wc = b.get("waist_across_mm", b["waist_mm"]) * 1e-3
            peak = 2 * b["power_mW"] * 1e-3 / (math.pi * wa * wc)
            for p in range(b.get("passes", 1)):
                self.passes.append(Pass(
                    self.ids.index(lo), self.ids.index(up), g[lo] / g[up], sigma0, gamma,
                    2 * math.pi / lam, 2 * math.pi * C.c / lam, peak, wa, wc,
                    b.get("position_mm", 0.0) * 1e-3, math.radians(b.get("angle_deg", 90.0)),
                    b.get("detuning_MHz", 0.0) * 1e6, 1.0 if p % 2 == 0 else -1.0, bi))
        self.size = n + len(self.passes)

    def _arrays(self):
        """Per-pass constants as arrays, and the unit flow matrix of each pass."""
        if not hasattr(self, "_cache"):
            P = self.passes
            get = lambda name: np.array([getattr(p, name) for p in P])
            n = self.L + 1
            flows = np.zeros((len(P), self.size, self.size))
            for j, p in enumerate(P):
                # flow R (N_i - r N_k) from i to k, counted by the photon counter
                for row, sgn in ((p.lower, -1.0), (p.upper, 1.0), (n + j, 1.0)):
                    flows[j, row, p.lower] += sgn
                    flows[j, row, p.upper] -= sgn * p.ratio
            base = np.zeros((self.size, self.size))
            base[:n, :n] = self.decay
            self._cache = {name: get(name) for name in
                           ("sigma0", "gamma", "k", "omega", "peak", "wa", "wc", "z", "theta",
                            "delta", "sign")}
            self._cache.update(flows=flows, base=base)
        return self._cache

    def rates(self, t, v, a, y0):
        """Excitation rate ``R`` of every pass at time ``t``, 1/s."""
        c = self._arrays()
        s = np.sin(c["theta"])
        intensity = c["peak"] * np.exp(-2 * ((v * t - c["z"]) * s / c["wa"]) ** 2) \
            * np.exp(-2 * (y0 / c["wc"]) ** 2)
        D = 2 * np.pi * c["delta"] - c["sign"] * c["k"] * (v * np.cos(c["theta"]) + v * a * s)
        sigma = c["sigma0"] / (1 + (2 * D / c["gamma"]) ** 2)
        return sigma * intensity / (C.hbar * c["omega"])

    def matrix(self, t, v, a, y0):
        """``dy/dt = M y`` at time ``t``."""
        c = self._arrays()
        return c["base"] + np.tensordot(self.rates(t, v, a, y0), c["flows"], axes=1)

    def matrix_function(self, v, a, y0):
        """``t -> M(t)`` for one atom, with everything but the time dependence folded in
        (the same formulas as :meth:`rates`, precomputed for speed)."""
        c = self._arrays()
        peak_rates = self.rates((c["z"] / v), v, a, y0)  # at each pass's own centre
        q = 2 * (np.sin(c["theta"]) / c["wa"]) ** 2
        z, base = c["z"], c["base"]
        flows = c["flows"].reshape(len(self.passes), -1)

        def M(t):
            return base + ((peak_rates * np.exp(-q * (v * t - z) ** 2)) @ flows).reshape(base.shape)
        return M

    def z_range(self):
        """model.md: z_b -/+ 4 w_a / sin(theta) over all beams."""
        lo = min(p.z - 4 * p.wa / math.sin(p.theta) for p in self.passes)
        hi = max(p.z + 4 * p.wa / math.sin(p.theta) for p in self.passes)
        return lo, hi

    def solve(self, v, a, y0, initial, z_range=None, rtol=1e-10, atol=1e-13):
        """Final state of one atom (scipy Radau), populations then photon counters."""
        z0, z1 = z_range or self.z_range()
        y = np.zeros(self.size)
        y[: self.L] = initial
        M = self.matrix_function(v, a, y0)
        sol = solve_ivp(lambda t, yy: M(t) @ yy, (z0 / v, z1 / v), y, method="Radau",
                        rtol=rtol, atol=atol, jac=lambda t, yy: M(t))
        assert sol.success, sol.message
        return sol.y[:, -1]

    def photons_per_beam(self, final):
        out = np.zeros(len(self.beam_names))
        for j, p in enumerate(self.passes):
            out[p.beam] += final[self.L + 1 + j]
        return out

    def deflection_per_beam(self, final, v):
        """model.md: photons * hbar k sin(theta) / (m v), signed along +x per pass."""
        out = np.zeros(len(self.beam_names))
        for j, p in enumerate(self.passes):
            out[p.beam] += p.sign * final[self.L + 1 + j] * C.hbar * p.k * math.sin(p.theta) / (
                self.mass * v)
        return out

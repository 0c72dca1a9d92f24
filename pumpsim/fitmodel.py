"""The model a fit compares with measured data: a setup, its free values, frozen rules.

Measured data come as CSV (docs/measurement.md): one or two columns named by
numeric setup keys (the conditions of each row), one measured column named
by what it measures (:data:`OBSERVABLES`) and optionally ``uncertainty``.
Each row is one setup; before the fit every row is simulated once by the
adaptive engine at the start values and its grid and rules frozen
(:mod:`pumpsim.frozen`), so that the model is smooth in the parameters. The
rows' evaluations for all parameter vectors the fit asks for at once (the
Jacobian's columns) go to an executor together.

Free values: any numeric setup key (file units, as ``--set``), a scheme value
(:mod:`pumpsim.scheme_values`), and ``scale`` and ``background``: the
prediction is ``scale * observable + background`` (1 and 0 unless freed),
for data in arbitrary units.
"""

import csv
import math
from dataclasses import dataclass

import numpy as np

from .errors import InputError
from .executors import SerialExecutor, run_ordered
from .fit import Parameter
from .frozen import freeze_setup
from .probe import capture_nodes, captured, carried, probes, pumps_off, signals
from .scan import field_of
from .scheme_values import is_scheme_key, scheme_bounds, scheme_value, with_scheme_value
from .setup_file import check_numeric_key

OBSERVABLES = {
    "transfer_fraction": "target population after the beams (per atom)",
    "detected_per_atom": "probe photons detected per atom",
    "counts_per_s": "probe counts per second (needs source.flux_per_s)",
    "gain": "probe signal with pumps over without",
    "captured_target_fraction": "target population below the capture speed (per atom)",
}
UNCERTAINTY = "uncertainty"
SIGNAL_TERMS = ("scale", "background")
CAPTURE_FIT_PANELS = 16  # fixed panels below the capture speed during a fit


@dataclass(frozen=True)
class Data:
    """Measured rows.

    Parameters
    ----------
    path : str
    keys : tuple of str
        Setup keys of the condition columns.
    x : ndarray (n, len(keys))
        Conditions, file units.
    observable : str
    y : ndarray (n,)
    sigma : ndarray (n,) or None
    text : str
        The file verbatim.
    """

    path: str
    keys: tuple
    x: np.ndarray
    observable: str
    y: np.ndarray
    sigma: object
    text: str


def read_data(path, setup) -> Data:
    """Read and check a measured-data CSV against a setup."""
    try:
        with open(path, encoding="utf-8", newline="") as fh:
            text = fh.read()
    except OSError as exc:
        raise InputError(f"cannot read the data file ({exc.strerror or exc})", str(path)) from None
    lines = [ln for ln in text.splitlines() if ln.strip() and not ln.lstrip().startswith("#")]
    rows = list(csv.reader(lines))
    if len(rows) < 2:
        raise InputError("needs a header line and at least one row of numbers", str(path))
    header = [h.strip() for h in rows[0]]
    measured = [h for h in header if h in OBSERVABLES]
    if len(measured) != 1:
        raise InputError("needs exactly one measured column, named one of "
                         f"{', '.join(OBSERVABLES)}; got {', '.join(header)}", str(path), "header")
    keys = [h for h in header if h not in OBSERVABLES and h != UNCERTAINTY]
    if not 1 <= len(keys) <= 2:
        raise InputError("needs one or two condition columns named by setup keys (e.g. "
                         f"beam.pump.power_mW); got {len(keys)}", str(path), "header")
    for k in keys:
        check_numeric_key(setup, k, f"{path} header")
    table = np.empty((len(rows) - 1, len(header)))
    for i, row in enumerate(rows[1:], start=2):
        if len(row) != len(header):
            raise InputError(f"has {len(row)} values, the header {len(header)}", str(path),
                             f"row {i}")
        for j, cell in enumerate(row):
            try:
                table[i - 2, j] = float(cell)
            except ValueError:
                raise InputError(f"not a number: {cell!r}", str(path), f"row {i}",
                                 header[j]) from None
            if not math.isfinite(table[i - 2, j]):
                raise InputError(f"not finite: {cell!r}", str(path), f"row {i}", header[j])
    sigma = None
    if UNCERTAINTY in header:
        sigma = table[:, header.index(UNCERTAINTY)]
        if not np.all(sigma > 0):
            raise InputError("uncertainties must be > 0", str(path), UNCERTAINTY)
    obs = measured[0]
    if obs == "counts_per_s" and setup.source.flux is None:
        raise InputError("counts_per_s needs the source's flux_per_s", setup.path, "source",
                         "flux_per_s")
    if obs in ("detected_per_atom", "counts_per_s", "gain") and not probes(setup):
        raise InputError(f"{obs} needs a probe beam (role = \"probe\")", setup.path, "beam", "role")
    if obs == "captured_target_fraction" and setup.next_stage.capture_speed is None:
        raise InputError("captured_target_fraction needs capture_speed_m_s", setup.path,
                         "next_stage", "capture_speed_m_s")
    return Data(str(path), tuple(keys), table[:, [header.index(k) for k in keys]], obs,
                table[:, header.index(obs)], sigma, text)


def setup_value(setup, key):
    """Current value (file units) of a numeric setup key: as written, else its default."""
    parts = key.split(".")
    doc = setup.document
    if parts[0] == "beam":
        node = next(b for b in doc.get("beam", []) if b.get("name") == parts[1])
        leaf = parts[2]
    else:
        node = doc
        for p in parts[:-1]:
            node = node.get(p, {})
        leaf = parts[-1]
    if leaf in node:
        return float(node[leaf])
    field = field_of(key)
    return None if field is None or field.default is None else float(field.default)


def parse_free(text, setup, data) -> Parameter:
    """A :class:`~pumpsim.fit.Parameter` from ``KEY`` or ``KEY=LOW:HIGH`` (file units)."""
    key, sep, rng = (s.strip() for s in text.partition("="))
    where = dict(file=setup.path, table="--free", key=key or None)
    if key in SIGNAL_TERMS:
        start = 1.0 if key == "scale" else 0.0
        low, high = -np.inf, np.inf
        typical = 1.0 if key == "scale" else float(np.ptp(data.y) or np.max(np.abs(data.y)) or 1.0)
    elif is_scheme_key(key):
        start = scheme_value(setup, key)
        low, high = scheme_bounds(key)
        typical = abs(start)
    else:
        check_numeric_key(setup, key, "--free")
        if key in data.keys:
            raise InputError("is a condition column of the data; it cannot be free too", **where)
        start = setup_value(setup, key)
        if start is None:
            raise InputError("has no value in the setup to start from; give one with --set",
                             **where)
        field = field_of(key)
        low = -np.inf if field is None or field.low is None else field.low
        high = np.inf if field is None or field.high is None else field.high
        typical = abs(start) or (float(np.ptp(field.span)) if field and field.span else 1.0)
    if sep:
        a, colon, b = rng.partition(":")
        try:
            if not colon:
                raise ValueError
            low, high = max(low, float(a)), min(high, float(b))
        except ValueError:
            raise InputError(f"needs KEY or KEY=LOW:HIGH, got {text!r}", **where) from None
        if not low < high:
            raise InputError(f"LOW must be below HIGH, got {rng!r}", **where)
        if not low <= start <= high:
            raise InputError(f"the setup's value {start:g} lies outside {low:g}:{high:g}; "
                             "move it inside with --set", **where)
    return Parameter(key, start, low, high, typical or 1.0)


def apply(setup, names, values):
    """``setup`` with the free values set (scheme values first); ``scale`` and
    ``background`` are left to the caller."""
    for n, v in zip(names, values):
        if is_scheme_key(n):
            setup = with_scheme_value(setup, n, float(v))
    for n, v in zip(names, values):
        if n not in SIGNAL_TERMS and not is_scheme_key(n):
            field = field_of(n)
            setup = setup.with_value(n, int(round(v)) if field and field.kind is int else float(v))
    return setup


def row_setup(setup, keys, x):
    for k, v in zip(keys, x):
        field = field_of(k)
        setup = setup.with_value(k, int(round(v)) if field and field.kind is int else float(v))
    return setup


def observe(setup, nodes, observable, probe, capture=None):
    """The observable from ensemble nodes (``capture``: nodes below the capture speed)."""
    if observable == "transfer_fraction":
        return float(nodes.weight @ nodes.values[:, setup.scheme.index(setup.target)])
    if observable == "captured_target_fraction":
        if capture is None:
            return 0.0
        return carried(setup, capture, float(capture.weight.sum()))["target"]
    s = signals(setup, nodes)[probe]
    return s * setup.source.flux if observable == "counts_per_s" else s


def frozen_value(task):
    """One row's observable under frozen rules (module-level, for every executor)."""
    setup, rule, rule_off, observable, probe = task
    nodes = rule.evaluate(setup)
    capture = None
    if observable == "captured_target_fraction":
        capture = capture_nodes(setup, rule.z, rule.sizes, CAPTURE_FIT_PANELS)
    value = observe(setup, nodes, observable, probe, capture)
    if observable == "gain":
        off = pumps_off(setup)
        value = value / signals(off, rule_off.evaluate(off))[probe]
    return value


def adaptive_value(task):
    """One row's observable by the adaptive engine, with the rules it settled on
    (module-level, for every executor): ``(value, rule, rule_off)``."""
    setup, observable, probe = task
    rule, result = freeze_setup(setup)
    rule_off = None
    if observable == "captured_target_fraction":
        value = captured(setup, result)["target"]
    else:
        value = observe(setup, result.nodes, observable, probe)
    if observable == "gain":
        rule_off, off = freeze_setup(pumps_off(setup))
        value = value / signals(off.setup, off.nodes)[probe]
    return value, rule, rule_off


class FitModel:
    """Predictions of a setup for measured rows, as a function of the free values.

    Parameters
    ----------
    setup : Setup
    data : Data
    params : sequence of Parameter
    probe : str or None
        The probe beam whose signal is measured.
    executor : Executor, optional
    """

    def __init__(self, setup, data, params, probe=None, executor=None):
        self.setup, self.data, self.params = setup, data, list(params)
        self.names = [p.name for p in self.params]
        self.probe = probe
        self.executor = executor or SerialExecutor()
        self.evaluations = 0
        start = [p.start for p in self.params]
        self.rows_at_start = self.adaptive(start)
        self.rules = [(r[1], r[2]) for r in self.rows_at_start]

    def _signal(self, values, raw):
        d = dict(zip(self.names, values))
        return d.get("scale", 1.0) * np.asarray(raw) + d.get("background", 0.0)

    def adaptive(self, values, xs=None):
        """Rows (or conditions ``xs``) by the adaptive engine: ``(value, rule, rule_off)``."""
        xs = self.data.x if xs is None else xs
        base = apply(self.setup, self.names, values)
        tasks = [(row_setup(base, self.data.keys, x), self.data.observable, self.probe)
                 for x in xs]
        return run_ordered(self.executor, adaptive_value, tasks)

    def predict(self, P, xs=None, rules=None):
        """Predictions (k, n) for parameter vectors ``P`` (k, p) at conditions ``xs``
        (default: the data's rows) with frozen ``rules`` (default: the rows' own)."""
        xs = self.data.x if xs is None else xs
        rules = self.rules if rules is None else rules
        tasks = []
        for p in np.atleast_2d(P):
            base = apply(self.setup, self.names, p)
            tasks += [(row_setup(base, self.data.keys, x), r, r_off, self.data.observable,
                       self.probe) for x, (r, r_off) in zip(xs, rules)]
        raw = np.array(run_ordered(self.executor, frozen_value, tasks)).reshape(len(P), len(xs))
        self.evaluations += len(tasks)
        return np.array([self._signal(p, row) for p, row in zip(np.atleast_2d(P), raw)])

    def start_signal(self):
        """The adaptive engine's predictions at the start values."""
        start = [p.start for p in self.params]
        return self._signal(start, [r[0] for r in self.rows_at_start])

    def linear_start(self):
        """The parameters with ``scale`` and ``background`` (those free) started at their
        linear least-squares values on the start predictions: data in arbitrary units
        then start close."""
        free = [n for n in SIGNAL_TERMS if n in self.names]
        if not free:
            return self.params
        raw = np.array([r[0] for r in self.rows_at_start])
        w = 1 / self.data.sigma if self.data.sigma is not None else np.ones_like(raw)
        cols = [raw if n == "scale" else np.ones_like(raw) for n in free]
        known = 0.0 if "scale" in free else raw
        coef = np.linalg.lstsq(np.array(cols).T * w[:, None], (self.data.y - known) * w,
                               rcond=None)[0]
        new = dict(zip(free, (float(c) for c in coef)))
        out = []
        for p in self.params:
            if p.name in new:
                typical = abs(new[p.name]) or p.typical if p.name == "scale" else p.typical
                p = Parameter(p.name, new[p.name], p.low, p.high, typical)
            out.append(p)
        return out

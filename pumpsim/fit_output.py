"""What a fit reports: the JSON object, the HDF5 file and the figure (docs/measurement.md)."""

import numpy as np

from .h5out import STR, h5_bytes, write_header
from .outpaths import commit


def fit_report(setup, data, fit, checks, curve=None) -> dict:
    """The JSON object of ``pumpsim fit --json`` (file units)."""
    params = []
    for i, name in enumerate(fit.names):
        params.append({"key": name, "value": float(fit.values[i]),
                       "stderr": float(fit.stderr[i]) if np.isfinite(fit.stderr[i]) else None,
                       "determined": not fit.flags[name], "warnings": fit.flags[name]})
    out = {
        "setup": setup.path, "data": data.path, "observable": data.observable,
        "parameters": params,
        "correlation": [[None if not np.isfinite(c) else float(c) for c in row]
                        for row in fit.correlation],
        "chi2": fit.chi2, "dof": fit.dof, "chi2_per_dof": fit.chi2_per_dof,
        "errors_from_scatter": fit.scaled_by_scatter,
        "points": {"conditions": {k: data.x[:, j].tolist() for j, k in enumerate(data.keys)},
                   "measured": data.y.tolist(),
                   "uncertainty": None if data.sigma is None else data.sigma.tolist(),
                   "model": fit.predicted.tolist(), "normalized_residual": fit.residuals.tolist()},
        "frozen_rule_check": checks,
        "evaluations": fit.evaluations, "converged": fit.success, "message": fit.message,
        "warnings": fit.warnings(),
    }
    if curve is not None:
        out["curve"] = {"x": curve[0].tolist(), "model": curve[1].tolist(),
                        "band": None if curve[2] is None else curve[2].tolist()}
    return out


def write_fit(path, setup, data, report, command=""):
    """The fit, its data and inputs to HDF5, whole or not at all."""
    def fill(f):
        write_header(f, setup, command, "fit")
        f["inputs"].create_dataset("data_csv", data=data.text, dtype=STR)
        f["inputs"].attrs["data_path"] = data.path
        d = f.create_group("data")
        for j, k in enumerate(data.keys):
            d.create_dataset(k, data=data.x[:, j]).attrs["role"] = "condition"
        d.create_dataset(data.observable, data=data.y).attrs["role"] = "measured"
        if data.sigma is not None:
            d.create_dataset("uncertainty", data=data.sigma)
        r = f.create_group("fit")
        ps = report["parameters"]
        r.create_dataset("keys", data=[p["key"] for p in ps], dtype=STR)
        r.create_dataset("values", data=[p["value"] for p in ps])
        r.create_dataset("stderr", data=[np.inf if p["stderr"] is None else p["stderr"]
                                         for p in ps])
        r.create_dataset("determined", data=[p["determined"] for p in ps])
        r.create_dataset("correlation", data=np.array(
            [[np.nan if c is None else c for c in row] for row in report["correlation"]]))
        r.create_dataset("model", data=report["points"]["model"])
        r.create_dataset("normalized_residual", data=report["points"]["normalized_residual"])
        if "curve" in report:
            c = r.create_group("curve")
            c.create_dataset("x", data=report["curve"]["x"])
            c.create_dataset("model", data=report["curve"]["model"])
            if report["curve"]["band"] is not None:
                c.create_dataset("band", data=report["curve"]["band"])
        for k in ("chi2", "dof", "chi2_per_dof", "errors_from_scatter", "evaluations",
                  "observable", "message"):
            r.attrs[k] = report[k]
        r.create_dataset("warnings", data=report["warnings"], dtype=STR)
        for k, v in report["frozen_rule_check"].items():
            r.attrs[f"frozen_rule_check.{k}"] = v
        f.attrs["complete"] = True

    commit(path, h5_bytes(fill), "the fit file")

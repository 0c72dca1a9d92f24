"""Least-squares fits: covariances, coverage and undetermined values (docs/measurement.md)."""

import json
import subprocess
import sys

import h5py
import numpy as np
import pytest

import pumpsim
from pumpsim.fit import Parameter, least_squares_fit
from pumpsim.scheme_values import with_scheme_value

from builders import beam, decay, level, scheme_doc, write_case


def polynomial(x):
    return lambda P: P[:, 0, None] + P[:, 1, None] * x + P[:, 2, None] * x * x


def test_linear_model_matches_numpy_polyfit_covariance():
    # A model linear in its parameters: best values and covariance must be those of
    # numpy.polyfit (weighted: cov="unscaled"; without uncertainties: cov=True, which
    # scales by chi^2 per degree of freedom). Reference: numpy.polyfit.
    rng = np.random.default_rng(7)
    x = np.linspace(-1.0, 4.0, 25)
    sigma = 0.05 + 0.02 * x * x
    y = 0.3 - 1.2 * x + 0.25 * x * x + rng.normal(0.0, sigma)
    params = [Parameter(n, 0.0, typical=t) for n, t in (("a", 1.0), ("b", 10.0), ("c", 0.1))]
    fit = least_squares_fit(polynomial(x), params, y, sigma)
    coef, cov = np.polyfit(x, y, 2, w=1 / sigma, cov="unscaled")
    assert fit.values == pytest.approx(coef[::-1], rel=1e-7, abs=1e-9)
    assert fit.covariance == pytest.approx(cov[::-1, ::-1], rel=1e-6)
    assert fit.chi2_per_dof == pytest.approx(
        np.sum(((y - np.polyval(coef, x)) / sigma) ** 2) / (len(x) - 3), rel=1e-7)
    fit = least_squares_fit(polynomial(x), params, y)
    coef, cov = np.polyfit(x, y, 2, cov=True)
    assert fit.stderr == pytest.approx(np.sqrt(np.diag(cov))[::-1], rel=1e-6)
    assert not any(fit.flags.values())


def test_standard_errors_cover_the_true_value_68_percent_of_the_time():
    # The meaning of a standard error: over many noise draws the true value lies within
    # one standard error of the estimate in 68.3 % of them (normal errors; e.g.
    # P. R. Bevington and D. K. Robinson, Data Reduction and Error Analysis, ch. 8,
    # from memory). A cheap nonlinear model: a decay on a background.
    x = np.linspace(0.0, 5.0, 30)
    true = np.array([2.0, 1.3, 0.4])
    sigma = np.full(x.size, 0.08)

    def model(P):
        return P[:, 0, None] * np.exp(-x / P[:, 1, None]) + P[:, 2, None]

    seeds = 300
    inside = np.zeros(3)
    for seed in range(seeds):
        y = model(true[None])[0] + np.random.default_rng(seed).normal(0.0, sigma)
        fit = least_squares_fit(model, [Parameter("A", 1.0), Parameter("tau", 1.0, 0.01, 100.0),
                                        Parameter("c", 0.0)], y, sigma)
        inside += np.abs(fit.values - true) <= fit.stderr
    share = inside / seeds
    # binomial spread of a 68.3 % share over 300 seeds: 2.7 %; allow 3.5 of them
    assert np.all(np.abs(share - 0.683) < 0.095), share


def test_a_value_the_data_cannot_fix_is_flagged_not_given_a_small_error():
    # y = a * b * x fixes only the product a*b (common practice, no source), and a
    # parameter the model ignores is fixed by nothing at all.
    x = np.linspace(0, 1, 12)
    y = 2.0 * x + np.random.default_rng(1).normal(0, 0.01, x.size)
    fit = least_squares_fit(lambda P: P[:, 0, None] * P[:, 1, None] * x,
                            [Parameter("a", 1.0), Parameter("b", 1.5)], y, np.full(x.size, 0.01))
    assert all(fit.flags[n] for n in "ab")
    assert np.all(np.isinf(fit.stderr))
    fit = least_squares_fit(lambda P: P[:, 0, None] * x + 0 * P[:, 1, None],
                            [Parameter("slope", 1.0), Parameter("unused", 3.0)], y,
                            np.full(x.size, 0.01))
    assert fit.flags["unused"] and not fit.flags["slope"]
    assert np.isinf(fit.stderr[1]) and fit.stderr[0] == pytest.approx(0.01 / np.sqrt(x @ x))


def _case(tmp_path):
    """Invented three-level atom: a pump g -> e whose decays split between g and the
    target m; a single speed and no spread, so each evaluation is one trajectory."""
    scheme = scheme_doc([level("g", 0, 0), level("m", 900.0, 1), level("e", 20000.0, 1, 3e-8)],
                        [decay("e", "g", branching=0.7), decay("e", "m", branching=0.3)])
    doc = {"scheme": "scheme.toml", "target": "m",
           "source": {"kind": "monoenergetic", "speed_m_s": 300.0, "initial": {"g": 1.0}},
           "beam": [beam("pump", "g", "e", 0.01, 1.0)], "numerics": {"tolerance": 1e-5}}
    return write_case(tmp_path, scheme, doc)


def _data(tmp_path, setup, powers, name):
    """Invented data made by pumpsim from branching 0.22 plus 0.5 % noise."""
    true = with_scheme_value(setup, "decay.e.m.branching", 0.22)
    rng = np.random.default_rng(3)
    rows = ["# invented data made by pumpsim from branching 0.22 plus 0.5 % noise",
            "beam.pump.power_mW,transfer_fraction,uncertainty"]
    for p in powers:
        f = pumpsim.simulate(true.with_value("beam.pump.power_mW", float(p))).transfer_fraction
        rows.append(f"{p},{f + rng.normal(0, 0.005)},0.005")
    data = tmp_path / name
    data.write_text("\n".join(rows) + "\n")
    return data


def _fit(path, data, *extra):
    cmd = [sys.executable, "-m", "pumpsim.cli", "fit", str(path), str(data), "--free",
           "decay.e.m.branching=0.05:0.6", "--json", "--workers", "1", *extra]
    run = subprocess.run(cmd, capture_output=True, text=True)
    assert run.returncode == 0, run.stderr
    return json.loads(run.stdout)


def test_fit_command_recovers_a_branching_and_writes_hdf5(tmp_path):
    path = _case(tmp_path)
    data = _data(tmp_path, pumpsim.load_setup(path), np.geomspace(0.001, 0.1, 8), "scan.csv")
    out = tmp_path / "fit.h5"
    rep = _fit(path, data, "--out", str(out))
    (b,) = rep["parameters"]
    assert b["determined"], rep
    assert abs(b["value"] - 0.22) < 3 * b["stderr"]
    assert rep["frozen_rule_check"]["solution"] < 0.1  # in uncertainties
    with h5py.File(out) as f:
        assert f.attrs["complete"] and f.attrs["kind"] == "fit"
        assert list(f["fit/keys"].asstr()) == ["decay.e.m.branching"]
        assert "data_csv" in f["inputs"] and f["data/transfer_fraction"].shape == (8,)


def test_saturated_data_cannot_fix_the_branching(tmp_path):
    # Deep in saturation every atom ends in the target whatever the branching (the
    # excited level's other decay only returns atoms to be pumped again): common
    # practice, no source. The fit must say so rather than report a small error.
    path = _case(tmp_path)
    data = _data(tmp_path, pumpsim.load_setup(path), np.geomspace(2.0, 20.0, 5), "sat.csv")
    (b,) = _fit(path, data)["parameters"]
    assert not b["determined"] and b["warnings"]
    assert b["stderr"] is None or b["stderr"] > b["value"]


def test_bad_data_file_is_bad_input(tmp_path):
    path = _case(tmp_path)
    data = tmp_path / "bad.csv"
    data.write_text("beam.pump.power_mW,transfer_fraction\n0.1,oops\n")
    run = subprocess.run([sys.executable, "-m", "pumpsim.cli", "fit", str(path), str(data),
                          "--free", "decay.e.m.branching"], capture_output=True, text=True)
    assert run.returncode == 2 and "bad.csv" in run.stderr and "row 2" in run.stderr

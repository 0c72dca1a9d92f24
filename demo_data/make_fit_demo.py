"""Make the INVENTED measured data set demo_data/fit_demo.csv with pumpsim itself.

The "true" values are invented: the branching e2 -> m is 0.45 (the scheme file says
0.52) and the oven runs at 1050 K (the setup says 1150 K). For each pump power the
probe's counts per second are simulated at these values and 2 % Gaussian noise (fixed
seed) is added. Run from the source tree: python demo_data/make_fit_demo.py
"""

from pathlib import Path

import numpy as np

import pumpsim
from pumpsim.fitmodel import observe
from pumpsim.scheme_values import with_scheme_value

HERE = Path(__file__).parent
TRUE_BRANCHING, TRUE_TEMPERATURE_K = 0.45, 1050.0
POWERS_MW = np.geomspace(0.001, 1.0, 16)
NOISE = 0.01
SEED = 20261205


def main():
    setup = pumpsim.load_setup(HERE / "probe_setup.toml")
    setup = with_scheme_value(setup, "decay.e2.m.branching", TRUE_BRANCHING)
    setup = setup.with_value("source.temperature_K", TRUE_TEMPERATURE_K)
    rng = np.random.default_rng(SEED)
    rows = []
    for p in POWERS_MW:
        r = pumpsim.simulate(setup.with_value("beam.pump.power_mW", float(p)))
        counts = observe(r.setup, r.nodes, "counts_per_s", "probe")
        sigma = NOISE * counts
        rows.append((p, counts + rng.normal(0.0, sigma), sigma))
    lines = ["# INVENTED measured data, made by pumpsim (demo_data/make_fit_demo.py) from",
             f"# invented true values decay.e2.m.branching = {TRUE_BRANCHING} and",
             f"# source.temperature_K = {TRUE_TEMPERATURE_K} on demo_data/probe_setup.toml,",
             f"# plus {NOISE:.0%} Gaussian noise (seed {SEED}). Not a measurement of anything.",
             "beam.pump.power_mW,counts_per_s,uncertainty"]
    lines += [f"{p:.6g},{c:.6g},{s:.4g}" for p, c, s in rows]
    (HERE / "fit_demo.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")


if __name__ == "__main__":
    main()

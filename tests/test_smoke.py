"""The demo loads and runs end to end (common practice, no source)."""

import pumpsim
from pumpsim.demo import demo_setup_path


def test_demo_runs_and_conserves_population():
    setup = pumpsim.load_setup(demo_setup_path())
    result = pumpsim.simulate(setup.with_value("numerics.tolerance", 1e-3))
    assert 0.0 < result.transfer_fraction < 1.0
    assert abs(sum(result.final_populations.values()) - 1.0) < 1e-10

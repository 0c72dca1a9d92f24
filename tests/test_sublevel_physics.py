"""Sublevel mode against level mode, published rubidium-87 figures and textbook pumping."""

import math
from pathlib import Path

import numpy as np
import pytest

import pumpsim
from pumpsim.basis import SublevelBasis
from pumpsim.demo import demo_setup_path
from pumpsim.hyperfine import MU_B_HZ_PER_T, g_F
from pumpsim.scheme_file import scheme_from_document
from pumpsim.setup_file import setup_from_document
from pumpsim.sparse_model import SparseRateModel

RB87 = str(Path(__file__).resolve().parent.parent / "schemes" / "rb87.toml")


def quick_demo():
    """The demo with a monoenergetic source, no divergence, loose tolerance."""
    s = pumpsim.load_setup(demo_setup_path())
    s = s.with_value("source", {"kind": "monoenergetic", "speed_m_s": 400.0,
                                "temperature_K": 1150.0, "initial": "thermal"})
    return s.with_value("numerics.tolerance", 1e-3)


def rb_setup(beams, **top):
    doc = {"scheme": RB87, "target": "5S1/2", "mode": "sublevel",
           "source": {"kind": "monoenergetic", "speed_m_s": 100.0, "initial": {"5S1/2": 1.0}},
           "beam": beams, "numerics": {"tolerance": 1e-3}}
    doc.update(top)
    return setup_from_document(doc, None)


@pytest.mark.parametrize("solver", ["exponential", "rosenbrock"])
def test_isotropic_sublevels_reduce_to_level_mode(solver):
    # model.md: level mode assumes evenly filled sublevels under isotropic light; sublevel
    # mode with "unpolarized" (isotropic) light, no field and no hyperfine structure must
    # reproduce it summed over sublevels (to 1e-6)
    level = quick_demo().with_value("numerics.solver", solver)
    sub = level.with_value("mode", "sublevel")
    a, b = pumpsim.simulate(level), pumpsim.simulate(sub)
    for key, value in a.final_populations.items():
        assert b.final_populations[key] == pytest.approx(value, abs=1e-6)
    assert np.abs(a.profile - b.profile).max() < 1e-6
    for name, value in a.photons_per_atom.items():
        assert b.photons_per_atom[name] == pytest.approx(value, rel=1e-6)
    summed = b.sublevels.profile @ np.eye(len(a.levels) - 1)[b.sublevels.level_of]
    assert np.abs(summed - b.profile[:, :-1]).max() < 1e-12


def test_degenerate_hyperfine_levels_reduce_to_level_mode_too():
    # with a nuclear spin but zero hyperfine constants the |F, m> basis spans the same
    # space as |J, m_J> x |I, m_I>; isotropic light must again give level mode
    # both runs at a tolerance well below the 1e-6 compared: the two modes may pick
    # different integrators and grids, which agree only to the tolerance
    base = quick_demo().with_value("numerics.tolerance", 1e-8)
    doc = dict(base.scheme.document)
    doc["species"] = dict(doc["species"], nuclear_spin=1.0)
    scheme = scheme_from_document(doc, base.scheme.path)
    level = setup_from_document(base.document, base.path, scheme=scheme)
    sub = setup_from_document(dict(base.document, mode="sublevel"), base.path, scheme=scheme)
    a, b = pumpsim.simulate(level), pumpsim.simulate(sub)
    for key, value in a.final_populations.items():
        assert b.final_populations[key] == pytest.approx(value, abs=1e-6)


def test_every_upper_sublevel_decays_at_its_level_rate():
    # Wigner-Eckart: the sublevel decay rates to a lower level sum to the level's A
    # (standard angular-momentum algebra, e.g. Steck, Rubidium 87 D Line Data)
    scheme = pumpsim.load_scheme(RB87)
    basis = SublevelBasis(scheme, 1e-4)
    G = basis.decay_generator()
    assert np.abs(G.sum(axis=0)).max() < 1e-6 * np.abs(G).max()
    for lid in ("5P1/2", "5P3/2"):
        k = scheme.index(lid)
        ups = basis.states_of(k)
        ground = basis.states_of(scheme.index("5S1/2"))
        assert G[np.ix_(ground, ups)].sum(axis=0) == pytest.approx(scheme.total_rate(lid), rel=1e-12)


def test_isotropic_light_drives_every_lower_sublevel_at_the_level_rate():
    # the premise of the reduction: summed over F', m' and q, 3 w_q X = 1 for w_q = 1/3
    setup = rb_setup([dict(name="p", transition=["5S1/2", "5P3/2"], power_mW=1.0, waist_mm=1.0)])
    basis = SublevelBasis(setup.scheme)
    sums = np.zeros(basis.size)
    for c in basis.couplings(setup.beams[0]):
        sums[c.lower] += c.strength
    assert sums[basis.states_of(0)] == pytest.approx(np.ones(8), abs=1e-12)


def test_sigma_cycling_saturation_intensity_is_steck_value():
    # Steck, Rubidium 87 D Line Data: saturation intensity of the sigma+ cycling line
    # |F=2, m=2> -> |F'=3, m'=3>, 1.669 mW/cm^2 (two-level: R = Gamma/2 at I = I_sat)
    w = 1e-3
    I0 = 1.669e-3 / 1e-4  # W/m^2
    power_mW = I0 * math.pi * w * w / 2 * 1e3
    setup = rb_setup([dict(name="p", transition=["5S1/2", "5P3/2"], reference_F=[2, 3],
                           polarization="sigma+", power_mW=power_mW, waist_mm=w * 1e3)])
    model = SparseRateModel(setup)
    basis = model.basis
    cs = basis.couplings(setup.beams[0])
    index = next(i for i, c in enumerate(cs)
                 if basis.labels[c.lower] == "5S1/2 F=2 m=+2" and basis.labels[c.upper] == "5P3/2 F=3 m=+3")
    v = np.array([100.0])
    rate = model.rates(0, v, np.zeros(1), np.zeros(1))[0, index] * v[0]  # 1/s at peak
    gamma = setup.scheme.total_rate("5P3/2")
    isat = I0 * gamma / (2 * rate)
    assert isat * 0.1 == pytest.approx(1.669, rel=5e-4)
    # the cycling pair is closed: |3,3> decays only to |2,2>
    G = basis.decay_generator()
    assert G[cs[index].lower, cs[index].upper] == pytest.approx(gamma, rel=1e-12)


def test_zeeman_shift_enters_each_pair_detuning():
    # linear Zeeman effect: the pair resonance moves by (g_F' m' - g_F m) mu_B B / h
    B = 2e-4  # 2 G
    setup = rb_setup([dict(name="p", transition=["5S1/2", "5P3/2"], reference_F=[2, 3],
                           polarization="sigma+", power_mW=1.0, waist_mm=1.0)],
                     field={"B_gauss": 2.0})
    basis = SublevelBasis(setup.scheme, setup.magnetic_field)
    lo, up = setup.scheme.level("5S1/2"), setup.scheme.level("5P3/2")
    expected = (g_F(3, 1.5, 1.5, up.g_J) * 3 - g_F(2, 0.5, 1.5, lo.g_J) * 2) * MU_B_HZ_PER_T * B
    (c,) = [c for c in basis.couplings(setup.beams[0])
            if basis.labels[c.lower] == "5S1/2 F=2 m=+2" and basis.labels[c.upper] == "5P3/2 F=3 m=+3"]
    assert c.shift == pytest.approx(expected, rel=1e-12)
    assert abs(expected) == pytest.approx(2 * 1.3996e6 * (3 * 0.6681 - 2 * 0.5003), rel=2e-3)


def test_sigma_plus_on_d1_pumps_into_the_stretched_dark_state():
    # textbook optical pumping (e.g. Foot, Atomic Physics, 2005; Happer, Rev. Mod. Phys. 44,
    # 169, 1972): sigma+ light on F=2 -> F'=2, with F=1 repumped, leaves every atom in
    # |F=2, m=2>, which no sigma+ D1 transition can excite
    beam = dict(transition=["5S1/2", "5P1/2"], polarization="sigma+", power_mW=1.0, waist_mm=2.0)
    setup = rb_setup([dict(beam, name="pump", reference_F=[2, 2]),
                      dict(beam, name="repump", reference_F=[1, 2])])
    result = pumpsim.simulate(setup)
    pops = result.to_dict()["sublevel_populations"]
    assert pops["5S1/2 F=2 m=+2"] > 0.999
    assert result.sublevels.dark_populations().keys() == {"5S1/2 F=2 m=+2"}
    assert result.to_dict()["dark_fraction"] > 0.999
    assert result.sublevels.exposure[list(result.sublevels.labels).index("5S1/2 F=2 m=+2")] == 0.0
    assert result.final_populations["5S1/2"] == pytest.approx(1.0, abs=1e-9)


def test_d2_cycling_without_repump_reports_the_lower_hyperfine_level_as_dark():
    # off-resonant excitation of F'=2 (267 MHz away) leaks atoms to F=1, which a beam tuned
    # to F=2 -> F'=3 cannot reach (6.8 GHz away): the report must name F=1, not |2,2>
    setup = rb_setup([dict(name="pump", transition=["5S1/2", "5P3/2"], reference_F=[2, 3],
                           polarization="sigma+", power_mW=2.0, waist_mm=2.0)])
    result = pumpsim.simulate(setup)
    rep = result.sublevels
    dark = set(rep.dark_populations())
    assert dark and all(label.startswith("5S1/2 F=1") for label in dark)
    f1 = sum(p for label, p in rep.populations().items() if label.startswith("5S1/2 F=1"))
    assert rep.dark_fraction == pytest.approx(f1, abs=1e-12)
    assert 1e-4 < f1 < 0.9
    assert rep.populations()["5S1/2 F=2 m=+2"] > 0.05


def test_sublevel_demo_pumps_most_atoms_into_the_stretched_state():
    # The shipped sublevel demo: the same textbook pumping as above (Foot 2005; Happer
    # 1972) at a weak power and a spread of speeds, so most but not all atoms arrive
    # in |F=2, m=2>, and that is what the dark-sublevel report names.
    path = Path(demo_setup_path()).parent / "rb87_optical_pumping.toml"
    result = pumpsim.simulate(pumpsim.load_setup(path))
    d = result.to_dict()
    stretched = d["sublevel_populations"]["5S1/2 F=2 m=+2"]
    assert 0.9 < stretched < 0.999 and result.numerics.converged
    assert d["dark_sublevels"] == {"5S1/2 F=2 m=+2": pytest.approx(stretched)}
    assert d["dark_fraction"] == pytest.approx(stretched)

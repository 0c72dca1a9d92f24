"""New optional scheme and setup keys of sublevel mode: parsing, errors, JSON (files.md style)."""

import json
from pathlib import Path

import pytest

import pumpsim
from pumpsim.cli import main
from pumpsim.demo import demo_setup_path
from pumpsim.scheme_file import scheme_from_document
from pumpsim.setup_file import setup_from_document

RB87 = str(Path(__file__).resolve().parent.parent / "schemes" / "rb87.toml")


def scheme_doc(**level_keys):
    return {"species": {"name": "x", "mass_u": 40.0},
            "level": [dict(id="g", energy_cm=0.0, J=0.5, **level_keys),
                      dict(id="e", energy_cm=15000.0, J=1.5, lifetime_s=2e-8)],
            "decay": [dict(upper="e", lower="g", branching=1.0)]}


@pytest.mark.parametrize("keys, species, key, words", [
    (dict(hfs_A_MHz=100.0), {}, "hfs_A_MHz", "nuclear_spin"),
    (dict(hfs_B_MHz=10.0), {"nuclear_spin": 1.5}, "hfs_B_MHz", "J >= 1"),
    (dict(g_J=2.0, L=0, S=0.5), {}, "g_J", "not both"),
    (dict(L=0), {}, "S", "together"),
    (dict(L=2, S=0.5), {}, "J", "cannot arise"),
    ({}, {"nuclear_spin": 1.25}, "nuclear_spin", "half-integer"),
])
def test_bad_scheme_keys_name_the_key(keys, species, key, words):
    doc = scheme_doc(**keys)
    doc["species"].update(species)
    with pytest.raises(pumpsim.InputError) as err:
        scheme_from_document(doc, "s.toml")
    assert err.value.key == key and words in str(err.value) and "s.toml" in str(err.value)


def test_lande_factor_from_L_and_S():
    s = scheme_from_document(scheme_doc(L=0, S=0.5), "s.toml")
    assert s.level("g").g_J == pytest.approx(2.0023, abs=1e-4)  # g_S, CODATA via scipy


def rb_doc(**beam):
    return {"scheme": RB87, "target": "5S1/2", "mode": "sublevel",
            "source": {"kind": "monoenergetic", "speed_m_s": 100.0, "initial": {"5S1/2": 1.0}},
            "beam": [dict(name="p", transition=["5S1/2", "5P3/2"], power_mW=1.0, waist_mm=1.0,
                          **beam)],
            "numerics": {"tolerance": 1e-3}}


@pytest.mark.parametrize("beam, key, words", [
    (dict(polarization="circular"), "polarization", "sigma+"),
    (dict(polarization={"linear_deg": "x"}), "polarization", "number"),
    (dict(polarization={"angle": 3}), "polarization", "linear_deg"),
    (dict(reference_F=[2, 4]), "reference_F", "F = 0, 1, 2, 3"),
    (dict(reference_F=[1, 3]), "reference_F", "electric-dipole"),
    (dict(reference_F=2), "reference_F", "[F, F']"),
])
def test_bad_beam_keys_name_the_beam_and_key(beam, key, words):
    with pytest.raises(pumpsim.InputError) as err:
        setup_from_document(rb_doc(**beam), "x.toml")
    assert err.value.key == key and err.value.table == "beam 'p'" and words in str(err.value)


def test_mode_and_field_are_checked():
    with pytest.raises(pumpsim.InputError) as err:
        setup_from_document(dict(rb_doc(), mode="hyperfine"), "x.toml")
    assert err.value.key == "mode"
    with pytest.raises(pumpsim.InputError) as err:
        setup_from_document(dict(rb_doc(), field={"B_tesla": 1}), "x.toml")
    assert err.value.table == "field"
    # a field needs g_J: the demo species gives none
    demo = pumpsim.load_setup(demo_setup_path())
    with pytest.raises(pumpsim.InputError) as err:
        demo.with_value("mode", "sublevel").with_value("field.B_gauss", 0.5)
    assert err.value.key == "g_J" and err.value.level == "g"
    # reference_F needs hyperfine data
    with pytest.raises(pumpsim.InputError) as err:
        demo.with_value("beam.pump.reference_F", [2, 2])
    assert "nuclear_spin" in str(err.value)


def test_new_keys_round_trip_through_the_writer():
    s = setup_from_document(rb_doc(polarization={"linear_deg": 30}, reference_F=[2, 3]), "x.toml")
    s = s.with_value("field.B_gauss", 0.25)
    again = setup_from_document(__import__("tomllib").loads(pumpsim.setup_to_toml(s)), "x.toml")
    assert again.beams == s.beams and again.magnetic_field == pytest.approx(2.5e-5)
    assert again.mode == "sublevel"


def test_level_mode_reference_f_moves_the_laser_to_that_component():
    # level mode has no hyperfine structure, but a beam tuned to F=2 -> F'=3 must sit at
    # the same laser frequency in both modes: the component's offset from the centroid,
    # F'=3 at +193.74 MHz minus F=2 at +2563.01 MHz (Steck's diagram, see
    # test_sublevel_angular)
    s = setup_from_document(dict(rb_doc(reference_F=[2, 3]), mode="level"), "x.toml")
    (c,) = pumpsim.basis.LevelBasis(s.scheme).couplings(s.beams[0])
    assert -c.shift / 1e6 == pytest.approx(193.74075 - 2563.005979, abs=1e-4)


def test_run_json_has_sublevel_keys(tmp_path, capsys):
    # files.md: --json prints one object; sublevel mode adds sublevel_populations and
    # dark_fraction while final_populations stays per level
    path = tmp_path / "s.toml"
    path.write_text(pumpsim.setup_to_toml(setup_from_document(
        rb_doc(polarization="sigma+", reference_F=[2, 3]), str(path))))
    assert main(["run", str(path), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert set(out["final_populations"]) == {"5S1/2", "5P1/2", "5P3/2", "other"}
    assert len(out["sublevel_populations"]) == 32
    assert sum(out["sublevel_populations"].values()) == pytest.approx(1.0, abs=1e-9)
    assert 0.0 <= out["dark_fraction"] <= 1.0
    assert out["numerics"]["solver"] == "rosenbrock"

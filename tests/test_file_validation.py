"""Every rule of files.md for schemes and setups: a bad value is an InputError whose
message names the file, the table and the key (and the level where one is involved).
The rules are the contract itself (files.md; common practice, no source)."""

import copy

import pytest

import pumpsim
from pumpsim.errors import InputError
from builders import beam, decay, level, scheme_doc, setup_doc, write_case, write_toml


def base_scheme():
    return scheme_doc(
        [level("g", 0, 0), level("m", 1000, 1), level("e", 20000, 1, 2e-8),
         level("x", 17000, 2)],
        [decay("e", "g", branching=0.6), decay("e", "m", branching=0.35),
         decay("x", "m", A_per_s=3e7), decay("x", "g", A_per_s=1e7, wavelength_nm=588.2353)])


def base_setup():
    return setup_doc(
        "m", {"kind": "effusive", "temperature_K": 900.0, "divergence_rms_mrad": 1.0},
        [beam("pump", "g", "e", 2.0, 1.0), beam("probe", "m", "x", 0.5, 0.5, position_mm=4.0)])


def _set(path, value):
    """Return a mutator setting doc[path...] = value (value DELETE removes the key)."""
    def mutate(doc):
        node = doc
        for p in path[:-1]:
            node = node[p]
        if value is DELETE:
            del node[path[-1]]
        else:
            node[path[-1]] = value
    return mutate


DELETE = object()

# (id, mutator of the scheme document, table, key, level)
SCHEME_RULES = [
    ("unknown top-level key", _set(["isotope"], 7), None, "isotope", None),
    ("unknown species key", _set(["species", "charge"], 1), "species", "charge", None),
    ("missing mass", _set(["species", "mass_u"], DELETE), "species", "mass_u", None),
    ("mass not a number", _set(["species", "mass_u"], "heavy"), "species", "mass_u", None),
    ("mass zero", _set(["species", "mass_u"], 0.0), "species", "mass_u", None),
    ("unknown level key", _set(["level", 1, "parity"], "odd"), "level", "parity", None),
    ("missing level J", _set(["level", 1, "J"], DELETE), "level", "J", None),
    ("missing level energy", _set(["level", 1, "energy_cm"], DELETE), "level", "energy_cm", None),
    ("J wrong type", _set(["level", 1, "J"], "one"), "level", "J", "m"),
    ("J not half-integer", _set(["level", 1, "J"], 1.3), "level", "J", "m"),
    ("negative energy", _set(["level", 1, "energy_cm"], -5.0), "level", "energy_cm", "m"),
    ("zero lifetime", _set(["level", 2, "lifetime_s"], 0.0), "level", "lifetime_s", "e"),
    ("duplicate level id", _set(["level", 3, "id"], "m"), "level", "id", "m"),
    ("unknown decay key", _set(["decay", 0, "strength"], 1.0), "decay", "strength", None),
    ("missing decay upper", _set(["decay", 0, "upper"], DELETE), "decay", "upper", None),
    ("unknown level in decay", _set(["decay", 0, "lower"], "q"), "decay", "lower", "q"),
    ("unknown upper in decay", _set(["decay", 2, "upper"], "zz"), "decay", "upper", "zz"),
    ("branchings over 1", _set(["decay", 0, "branching"], 0.7), "decay", "branching", "e"),
    ("one branching over 1", _set(["decay", 0, "branching"], 1.2), "decay", "branching", "e"),
    ("branching without lifetime", _set(["level", 2, "lifetime_s"], DELETE), "decay",
     "branching", "e"),
    ("A and branching mixed in one upper level", _set(["decay", 3, "branching"], 0.1), "decay",
     "A_per_s", "x"),
    ("A not a number", _set(["decay", 2, "A_per_s"], "fast"), "decay", "A_per_s", "x"),
    ("negative A", _set(["decay", 2, "A_per_s"], -3e7), "decay", "A_per_s", "x"),
    # 1/sum(A) = 25 ns; a 40 ns lifetime would need negative decay to 'other'
    ("lifetime longer than 1/sum(A)", _set(["level", 3, "lifetime_s"], 4e-8), "level",
     "lifetime_s", "x"),
    # 1e7/(17000 - 0) = 588.235 nm; 588.3 nm is 1.1 parts in 1e4 off
    ("wavelength disagrees with energies", _set(["decay", 3, "wavelength_nm"], 588.3), "decay",
     "wavelength_nm", "x"),
    ("decay upwards", _set(["decay", 2, "lower"], "e"), "decay", "upper", "x"),
]


@pytest.mark.parametrize("rule", SCHEME_RULES, ids=[r[0] for r in SCHEME_RULES])
def test_bad_scheme_names_file_table_key(tmp_path, rule):
    _, mutate, table, key, lid = rule
    doc = copy.deepcopy(base_scheme())
    mutate(doc)
    path = write_toml(tmp_path / "scheme.toml", doc)
    with pytest.raises(InputError) as exc:
        pumpsim.load_scheme(path)
    check_error(exc.value, path, table, key, lid)
    # a setup naming this scheme reports the scheme file, not the setup file
    setup = write_toml(tmp_path / "setup.toml", base_setup())
    with pytest.raises(InputError) as exc:
        pumpsim.load_setup(setup)
    check_error(exc.value, path, table, key, lid)


def test_wavelength_within_1e4_is_accepted(tmp_path):
    """588.2353 nm against 588.23529 from the energies: inside 1 part in 1e4 (files.md)."""
    scheme = pumpsim.load_scheme(write_toml(tmp_path / "scheme.toml", base_scheme()))
    assert scheme.decay("x", "g").wavelength == pytest.approx(588.2353e-9, rel=1e-12)


def test_lifetime_shorter_than_1_over_sum_A_sends_rest_to_other(tmp_path):
    """files.md: a lifetime shorter than 1/sum(A) sends the rest to 'other'."""
    doc = base_scheme()
    doc["level"][3]["lifetime_s"] = 2e-8  # G = 5e7, listed A = 4e7
    scheme = pumpsim.load_scheme(write_toml(tmp_path / "scheme.toml", doc))
    assert scheme.unlisted_rate("x") == pytest.approx(1e7, rel=1e-12)
    assert scheme.unlisted_rate("e") == pytest.approx(0.05 / 2e-8, rel=1e-9)


# (id, mutator of the setup document, table, key, level)
SETUP_RULES = [
    ("unknown top-level key", _set(["comment"], "hi"), None, "comment", None),
    ("missing target", _set(["target"], DELETE), None, "target", None),
    ("missing source", _set(["source"], DELETE), None, "source", None),
    ("unknown target level", _set(["target"], "zz"), None, "target", "zz"),
    ("scheme file not found", _set(["scheme"], "nowhere.toml"), None, "scheme", None),
    ("unknown source key", _set(["source", "pressure_Pa"], 1.0), "source", "pressure_Pa", None),
    ("missing source kind", _set(["source", "kind"], DELETE), "source", "kind", None),
    ("unknown source kind", _set(["source", "kind"], "laser-cooled"), "source", "kind", None),
    ("source kind wrong type", _set(["source", "kind"], 3), "source", "kind", None),
    ("effusive without temperature", _set(["source", "temperature_K"], DELETE), "source",
     "temperature_K", None),
    ("zero temperature", _set(["source", "temperature_K"], 0.0), "source", "temperature_K", None),
    ("negative divergence", _set(["source", "divergence_rms_mrad"], -1.0), "source",
     "divergence_rms_mrad", None),
    ("unknown level in initial", _set(["source", "initial"], {"g": 0.5, "q": 0.5}),
     "source.initial", "q", "q"),
    ("negative initial fraction", _set(["source", "initial"], {"g": 1.5, "m": -0.5}),
     "source.initial", "m", "m"),
    ("initial not summing to 1", _set(["source", "initial"], {"g": 0.5, "m": 0.4}),
     "source.initial", None, None),
    ("initial wrong text", _set(["source", "initial"], "cold"), "source", "initial", None),
    # a beam is named by its name where it has one, else by its position
    ("unknown beam key", _set(["beam", 0, "colour"], "blue"), "beam 'pump'", "colour", None),
    ("missing beam name", _set(["beam", 0, "name"], DELETE), "beam #1", "name", None),
    ("missing transition", _set(["beam", 0, "transition"], DELETE), "beam 'pump'", "transition", None),
    ("missing power", _set(["beam", 0, "power_mW"], DELETE), "beam 'pump'", "power_mW", None),
    ("missing waist", _set(["beam", 1, "waist_mm"], DELETE), "beam 'probe'", "waist_mm", None),
    ("unknown level in transition", _set(["beam", 0, "transition"], ["g", "nope"]),
     "beam 'pump'", "transition", "nope"),
    ("transition not a pair", _set(["beam", 0, "transition"], ["g"]), "beam 'pump'",
     "transition", None),
    ("transition downwards", _set(["beam", 0, "transition"], ["e", "g"]), "beam 'pump'",
     "transition", "g"),
    ("transition without a listed decay", _set(["beam", 0, "transition"], ["g", "m"]),
     "beam 'pump'", "transition", "m"),
    ("negative power", _set(["beam", 0, "power_mW"], -1.0), "beam 'pump'", "power_mW", None),
    ("power wrong type", _set(["beam", 0, "power_mW"], "ten"), "beam 'pump'", "power_mW", None),
    ("zero waist", _set(["beam", 0, "waist_mm"], 0.0), "beam 'pump'", "waist_mm", None),
    ("zero waist across", _set(["beam", 1, "waist_across_mm"], 0.0), "beam 'probe'",
     "waist_across_mm", None),
    ("negative laser linewidth", _set(["beam", 0, "linewidth_MHz"], -1.0), "beam 'pump'",
     "linewidth_MHz", None),
    ("angle zero", _set(["beam", 0, "angle_deg"], 0.0), "beam 'pump'", "angle_deg", None),
    ("angle 180", _set(["beam", 0, "angle_deg"], 180.0), "beam 'pump'", "angle_deg", None),
    ("zero passes", _set(["beam", 0, "passes"], 0), "beam 'pump'", "passes", None),
    ("fractional passes", _set(["beam", 0, "passes"], 1.5), "beam 'pump'", "passes", None),
    ("duplicate beam name", _set(["beam", 1, "name"], "pump"), "beam", "name", None),
    ("unknown numerics key", _set(["numerics"], {"steps": 10}), "numerics", "steps", None),
    ("tolerance out of range", _set(["numerics"], {"tolerance": 0.5}), "numerics", "tolerance",
     None),
    ("empty integration range", _set(["numerics"], {"start_mm": 5.0, "end_mm": -5.0}),
     "numerics", "end_mm", None),
]


@pytest.mark.parametrize("rule", SETUP_RULES, ids=[r[0] for r in SETUP_RULES])
def test_bad_setup_names_file_table_key(tmp_path, rule):
    _, mutate, table, key, lid = rule
    doc = copy.deepcopy(base_setup())
    mutate(doc)
    write_toml(tmp_path / "scheme.toml", base_scheme())
    path = write_toml(tmp_path / "setup.toml", doc)
    with pytest.raises(InputError) as exc:
        pumpsim.load_setup(path)
    check_error(exc.value, path, table, key, lid)


MONO_RULES = [
    ("monoenergetic without speed", "source.speed_m_s", None, "source", "speed_m_s"),
    ("monoenergetic with thermal populations", "source.initial", "thermal", "source",
     "temperature_K"),
    ("monoenergetic with a spread", "source.speed_spread_m_s", 5.0, "source", "speed_spread_m_s"),
]


@pytest.mark.parametrize("rule", MONO_RULES, ids=[r[0] for r in MONO_RULES])
def test_bad_value_set_in_code_names_table_and_key(tmp_path, rule):
    """Setup.with_value goes through the same checks (a value set in code or by --set)."""
    _, key, value, table, bad_key = rule
    doc = base_setup()
    doc["source"] = {"kind": "monoenergetic", "speed_m_s": 300.0, "initial": {"g": 1.0}}
    path = write_case(tmp_path, base_scheme(), doc)
    setup = pumpsim.load_setup(path)
    with pytest.raises(InputError) as exc:
        setup.with_value(key, value)
    check_error(exc.value, path, table, bad_key, None)


def test_gaussian_source_needs_its_spread(tmp_path):
    doc = base_setup()
    doc["source"] = {"kind": "gaussian", "speed_m_s": 300.0, "temperature_K": 900.0}
    path = write_case(tmp_path, base_scheme(), doc)
    with pytest.raises(InputError) as exc:
        pumpsim.load_setup(path)
    check_error(exc.value, path, "source", "speed_spread_m_s", None)


def test_not_toml_names_the_file(tmp_path):
    path = tmp_path / "setup.toml"
    path.write_text("target = \n")
    with pytest.raises(InputError) as exc:
        pumpsim.load_setup(path)
    assert str(path) in str(exc.value)


def check_error(err, path, table, key, lid):
    """The error names the file, the table and the key (and the level), in its fields and
    in the message a user reads."""
    msg = str(err)
    assert err.file == str(path), msg
    assert str(path) in msg
    if table is None:
        assert err.table in (None, ""), msg
    else:
        assert err.table == table, msg
        assert f"[{table}]" in msg
    assert err.key == key, msg
    if key:
        assert f"'{key}'" in msg
    if lid is not None:
        assert err.level == lid, msg
        assert f"'{lid}'" in msg

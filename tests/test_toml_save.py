"""Saving setups: values round-trip, and a saved file keeps the user's comments.

The checks are against the standard library's TOML reader (``tomllib``, the
TOML 1.0 specification's reference behaviour in Python), never against the
writer itself.
"""

import copy
import math
import tomllib

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import pumpsim
from pumpsim.demo import demo_setup_path
from pumpsim.setup_file import setup_from_document
from pumpsim.tomltext import dumps, restyle

# Any Unicode scalar value a TOML string may hold: every code point except the
# surrogates, including DEL, the C0 controls and characters outside the BMP
# (TOML 1.0, "String"; escapes exist for all of them).
TEXT = st.text(st.characters(blacklist_categories=("Cs",)), max_size=12)
KEY = st.text(st.characters(blacklist_categories=("Cs",)), min_size=1, max_size=8)
SCALAR = st.one_of(TEXT, st.integers(-2**63, 2**63 - 1), st.booleans(),
                   st.floats(allow_nan=False))
VALUE = st.one_of(SCALAR, st.lists(SCALAR, max_size=3),
                  st.dictionaries(KEY, SCALAR, max_size=3))  # inline tables
TABLE = st.dictionaries(KEY, VALUE, max_size=4)
DOCUMENT = st.dictionaries(
    KEY, st.one_of(VALUE, TABLE, st.lists(TABLE, min_size=1, max_size=3)), max_size=5)


@settings(max_examples=150, deadline=None)
@given(DOCUMENT)
def test_any_document_round_trips(doc):
    assert tomllib.loads(dumps(doc)) == doc


@settings(max_examples=150, deadline=None)
@given(DOCUMENT, DOCUMENT)
def test_a_document_written_into_another_files_text_reads_back_as_itself(old, new):
    text = "# a comment of the user\n" + dumps(old)
    assert tomllib.loads(restyle(new, text)) == new


@settings(max_examples=60, deadline=None)
@given(st.floats(min_value=1e-3, max_value=1e3).filter(lambda p: p != 30.0))
def test_saving_a_changed_power_keeps_every_comment(tmp_path_factory, power):
    folder = tmp_path_factory.mktemp("s")
    text = open(demo_setup_path(), encoding="utf-8").read()
    scheme = (demo_setup_path().parent / tomllib.loads(text)["scheme"]).resolve().as_posix()
    text = text.replace(tomllib.loads(text)["scheme"], scheme)
    commented = ("# Oven beam, invented lab\n" + text).replace(
        "power_mW = 30.0", "power_mW = 30.0  # measured at the fibre output", 1)
    assert "# measured at the fibre output" in commented
    path = folder / "setup.toml"
    path.write_text(commented, encoding="utf-8")
    setup = pumpsim.load_setup(path).with_value("beam.pump.power_mW", power)
    pumpsim.save_setup(setup, path)
    saved = path.read_text(encoding="utf-8")
    assert saved.startswith("# Oven beam, invented lab\n")
    assert "# measured at the fibre output" in saved
    assert tomllib.loads(saved)["beam"][0]["power_mW"] == power
    # every other line is as the user wrote it
    changed = [(a, b) for a, b in zip(commented.splitlines(), saved.splitlines()) if a != b]
    assert len(changed) == 1 and "power_mW" in changed[0][0]
    assert len(saved.splitlines()) == len(commented.splitlines())


def test_an_unchanged_setup_saves_byte_for_byte(tmp_path):
    text = "# header\n" + open(demo_setup_path(), encoding="utf-8").read()
    doc = tomllib.loads(text)
    assert restyle(doc, text) == text


@pytest.mark.parametrize("name", ["p\x7f", "p\U0001F600", "p\u2028"])
def test_beam_names_outside_the_bmp_and_del_round_trip(name):
    doc = {"beam": [{"name": name, "power_mW": 1.0}]}
    assert tomllib.loads(dumps(doc)) == doc
    assert not math.isnan(tomllib.loads(dumps(doc))["beam"][0]["power_mW"])


# Beam names may hold any character but the ones a --set key needs ('.', '=',
# brackets, whitespace: README, "Checks beyond the contract") and control characters.
BEAM_NAME = st.text(st.characters(blacklist_categories=("Cs", "Cc", "Zs", "Zl", "Zp"),
                                  blacklist_characters=".=[]{}\"'\\#") | st.just("\x7f"),
                    min_size=1, max_size=8)
POSITIVE = st.floats(min_value=1e-3, max_value=1e3, allow_nan=False)


@settings(max_examples=40, deadline=None)
@given(names=st.lists(BEAM_NAME, min_size=2, max_size=2, unique=True),
       powers=st.lists(POSITIVE, min_size=2, max_size=2), waist=POSITIVE,
       comment=st.text(st.characters(blacklist_categories=("Cs", "Cc")), max_size=20))
def test_generated_setups_round_trip_through_save(tmp_path_factory, names, powers, waist, comment):
    """A setup document (the demo's, with generated beam names, powers and a waist,
    and a comment of the user's) saved and loaded again is the same document."""
    folder = tmp_path_factory.mktemp("g")
    doc = tomllib.loads(open(demo_setup_path(), encoding="utf-8").read())
    doc["scheme"] = (demo_setup_path().parent / doc["scheme"]).resolve().as_posix()
    path = folder / "setup.toml"
    path.write_text(f"# {comment}\n" + dumps(doc), encoding="utf-8")
    setup = pumpsim.load_setup(path)
    changed = copy.deepcopy(setup.document)
    for beam, name, power in zip(changed["beam"], names, powers):
        beam["name"], beam["power_mW"] = name, power
    changed["beam"][0]["waist_mm"] = waist
    setup = setup_from_document(changed, str(path), text_=setup.text)
    pumpsim.save_setup(setup, path)
    again = pumpsim.load_setup(path)
    assert again.document == changed
    assert path.read_text(encoding="utf-8").startswith(f"# {comment}\n")

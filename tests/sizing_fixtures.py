"""Small invented schemes and setups for the sizing, route and scan tests.

Every setup is a single monoenergetic atom class (no divergence, unless a test
asks for a width across the laser) so that one simulation takes a fraction of
a second.
"""

import textwrap

import pumpsim

THREE_LEVEL = """
[species]
name = "three-level test atom (invented)"
mass_u = 40.0
[[level]]
id = "g"
energy_cm = 0.0
J = 0
[[level]]
id = "m"
energy_cm = 1000.0
J = 0
[[level]]
id = "e"
energy_cm = 20000.0
J = 1
lifetime_s = {lifetime}
[[decay]]
upper = "e"
lower = "g"
branching = {b_g}
[[decay]]
upper = "e"
lower = "m"
branching = {b_t}
"""

SETUP = """
scheme = "scheme.toml"
target = "m"
[source]
kind = "monoenergetic"
speed_m_s = {speed}
width_rms_mm = {width}
initial = {{ g = 1.0 }}
[[beam]]
name = "pump"
transition = ["g", "{upper}"]
power_mW = {power}
waist_mm = {waist}
[numerics]
tolerance = {tol}
"""


def write(tmp_path, scheme_text, **kw):
    """Write ``scheme.toml`` and ``setup.toml`` into ``tmp_path``; return the setup path."""
    opts = dict(speed=500.0, width=0.0, upper="e", power=0.01, waist=1.0, tol=1e-3)
    opts.update(kw)
    (tmp_path / "scheme.toml").write_text(textwrap.dedent(scheme_text))
    path = tmp_path / "setup.toml"
    path.write_text(SETUP.format(**opts))
    return path


def three_level(tmp_path, b_g=0.5, b_t=0.3, lifetime=2e-8, **kw):
    """g -> e pumped; e decays to g (b_g), to the target m (b_t) and to ``other``
    (the rest). Returns the loaded setup."""
    scheme = THREE_LEVEL.format(b_g=b_g, b_t=b_t, lifetime=lifetime)
    return pumpsim.load_setup(write(tmp_path, scheme, **kw))


TWO_ROUTES = """
[species]
name = "two-route test atom (invented)"
mass_u = 40.0
[[level]]
id = "g"
energy_cm = 0.0
J = 0
[[level]]
id = "m"
energy_cm = 1000.0
J = 0
[[level]]
id = "e1"
energy_cm = 20000.0
J = 1
lifetime_s = 2e-8
[[level]]
id = "e2"
energy_cm = 20000.0
J = 1
lifetime_s = 2e-8
[[decay]]
upper = "e1"
lower = "g"
branching = 0.5
[[decay]]
upper = "e1"
lower = "m"
branching = 0.2
[[decay]]
upper = "e2"
lower = "g"
branching = 0.5
[[decay]]
upper = "e2"
lower = "m"
branching = 0.4
"""


def two_routes(tmp_path, **kw):
    """Two lines out of g with equal cross-sections (same wavelength, J, lifetime and
    A to g); e2 sends twice as much to the target as e1 (0.4 against 0.2)."""
    return pumpsim.load_setup(write(tmp_path, TWO_ROUTES, upper="e1", **kw))

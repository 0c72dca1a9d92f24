"""Load a scheme TOML file (see ``files.md``) into a :class:`~pumpsim.scheme.Scheme`."""

from . import constants as K
from .errors import InputError, apart, unknown
from .hyperfine import LEVEL_KEYS, read_level_structure, read_nuclear_spin
from .scheme import Decay, Level, Scheme
from .tomlread import check_keys, number, read_toml, table_list, text

WAVELENGTH_AGREEMENT = 1e-4  # files.md: a given wavelength agrees with energies to 1 part in 1e4
SUM_SLACK = 1e-9  # float slack on "branchings sum to at most 1" and the lifetime check
# Physical ranges (file units). Generous on purpose: they keep out only numbers
# no atom has, which would otherwise overflow the arithmetic downstream
# (sigma0 ~ lambda^2, rates ~ 1/lifetime). Common practice, no source.
MASS_U = (0.1, 1e6)  # muonium (0.11 u) to large molecules and clusters
ENERGY_CM = (0.0, 1e7)  # up to 1 nm above the ground level
J_MAX = 1000.0
LIFETIME_S = (1e-15, 1e20)  # femtosecond autoionising levels to "practically stable"
A_PER_S = (1e-30, 1e15)
MIN_GAP_CM = 1e-4  # a decay needs this energy gap: 3 MHz, a wavelength below 100 m


def load_scheme(path) -> Scheme:
    """Read and validate a scheme file.

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    Scheme

    Raises
    ------
    InputError
        Naming file, table, key and level for anything unusable.
    """
    doc, raw_text = read_toml(path)
    return scheme_from_document(doc, str(path), raw_text)


def scheme_from_document(doc: dict, file=None, text_=None) -> Scheme:
    """Validate a parsed scheme document (file units) and convert to SI."""
    if "species" not in doc and {"scheme", "source", "beam"} & doc.keys():
        raise InputError("missing required key: this looks like a setup file, not a scheme",
                         file, None, "species")
    check_keys(doc, {"species", "level", "decay"}, file, None, required=("species", "level"))
    species = doc["species"]
    check_keys(species, {"name", "mass_u", "nuclear_spin"}, file, "species", required=("mass_u",))
    name = text(species, "name", file, "species") if "name" in species else "unnamed"
    mass = number(species, "mass_u", file, "species", low=MASS_U[0], high=MASS_U[1],
                  unit="u") * K.amu
    nuclear_spin = read_nuclear_spin(species, file)

    levels, seen = [], set()
    for raw in table_list(doc, "level", file):
        check_keys(raw, {"id", "label", "energy_cm", "J", "lifetime_s", *LEVEL_KEYS}, file,
                   "level", required=("id", "energy_cm", "J"))
        lid = text(raw, "id", file, "level")
        if lid in seen:
            raise InputError("duplicate level id", file, "level", "id", lid)
        if lid == "other":
            raise InputError("'other' is reserved for the unlisted-decay sink", file, "level", "id", lid)
        seen.add(lid)
        energy = number(raw, "energy_cm", file, "level", low=ENERGY_CM[0], high=ENERGY_CM[1],
                        unit="cm^-1", level=lid)
        J = number(raw, "J", file, "level", low=0.0, high=J_MAX, level=lid)
        if not (2 * J).is_integer():
            raise InputError(f"must be a whole or half-integer, got {J!r}", file, "level", "J", lid)
        life = None
        if "lifetime_s" in raw:
            life = number(raw, "lifetime_s", file, "level", low=LIFETIME_S[0],
                          high=LIFETIME_S[1], unit="s", level=lid)
        label = raw.get("label", lid)
        if not isinstance(label, str):
            raise InputError(f"must be text, got {label!r}", file, "level", "label", lid)
        levels.append(Level(lid, energy * 100.0 * K.h * K.c, J, life, label,
                            **read_level_structure(raw, lid, J, nuclear_spin, file)))
    by_id = {lv.id: lv for lv in levels}

    decays, modes, pairs = [], {}, set()
    for raw in table_list(doc, "decay", file, required=False):
        check_keys(raw, {"upper", "lower", "A_per_s", "branching", "wavelength_nm"}, file,
                   "decay", required=("upper", "lower"))
        up = text(raw, "upper", file, "decay")
        lo = text(raw, "lower", file, "decay")
        for key, lid in (("upper", up), ("lower", lo)):
            if lid not in by_id:
                raise InputError(unknown("level", lid, list(by_id)), file, "decay", key, lid)
        if (up, lo) in pairs:
            raise InputError(f"decay {up} -> {lo} listed twice", file, "decay", "upper", up)
        pairs.add((up, lo))
        gap = by_id[up].energy - by_id[lo].energy
        if gap <= 0:
            raise InputError(f"upper level must lie above lower level '{lo}'", file, "decay",
                             "upper", up)
        if gap < MIN_GAP_CM * 100.0 * K.h * K.c * (1 - 1e-6):  # slack: energies up to 1e7
            raise InputError(f"levels of a decay must be at least {MIN_GAP_CM:g} cm^-1 apart "
                             f"(lower level '{lo}')", file, "decay", "upper", up)
        has_a, has_b = "A_per_s" in raw, "branching" in raw
        if has_a == has_b:
            raise InputError("give exactly one of A_per_s or branching", file, "decay",
                             "A_per_s", up)
        mode = "A_per_s" if has_a else "branching"
        if modes.setdefault(up, mode) != mode:
            raise InputError("decays of one upper level must all use A_per_s or all branching",
                             file, "decay", mode, up)
        if has_a:
            rate = number(raw, "A_per_s", file, "decay", low=A_PER_S[0], high=A_PER_S[1],
                          unit="1/s", level=up)
        else:
            frac = number(raw, "branching", file, "decay", positive=True, level=up)
            if frac > 1:
                raise InputError(f"must be <= 1, got {frac!r}", file, "decay", "branching", up)
            if by_id[up].lifetime is None:
                raise InputError("branching needs lifetime_s on the upper level", file,
                                 "decay", "branching", up)
            rate = frac / by_id[up].lifetime
            if not A_PER_S[0] <= rate <= A_PER_S[1]:
                raise InputError(f"gives A = {rate:.3g} 1/s, outside {A_PER_S[0]:g} to "
                                 f"{A_PER_S[1]:g} 1/s", file, "decay", "branching", up)
        wl_energy = K.h * K.c / gap
        wl = wl_energy
        if "wavelength_nm" in raw:
            wl = number(raw, "wavelength_nm", file, "decay", positive=True, level=up) * 1e-9
            if abs(wl - wl_energy) > WAVELENGTH_AGREEMENT * wl_energy:
                raise InputError(
                    f"{wl * 1e9:.6g} nm disagrees with the energies ({wl_energy * 1e9:.6g} nm) "
                    f"by more than 1 part in 1e4", file, "decay", "wavelength_nm", up)
        decays.append(Decay(up, lo, rate, wl))

    for lid, mode in modes.items():
        total = sum(d.rate for d in decays if d.upper == lid)
        life = by_id[lid].lifetime
        if mode == "branching" and total * life > 1 + SUM_SLACK:
            shown_sum, _ = apart(total * life, 1.0)
            raise InputError(f"branchings sum to {shown_sum}, more than 1", file,
                             "decay", "branching", lid)
        if mode == "A_per_s" and life is not None and life > (1 + SUM_SLACK) / total:
            shown_life, shown_limit = apart(life, 1 / total)
            raise InputError(
                f"lifetime {shown_life} s is longer than 1/sum(A) = {shown_limit} s",
                file, "level", "lifetime_s", lid)
    return Scheme(name, mass, tuple(levels), tuple(decays), file, doc, text_,
                  nuclear_spin=nuclear_spin)

"""Laser cautions shown wherever a beam power is shown or proposed.

The class thresholds are the usual continuous-wave accessible-emission limits
of IEC 60825-1 (edition 3, 2014), quoted from memory: Class 3R up to 5 mW and
Class 3B up to 500 mW in the visible (400-700 nm), Class 4 above 500 mW.
They are a reminder, not a classification: the local laser-safety program and
officer decide.
"""

VISIBLE = (400e-9, 700e-9)
LIMIT_3R, LIMIT_3B = 5e-3, 0.5  # W, visible CW (IEC 60825-1:2014, from memory)

GENERAL = ("Laser safety: beams of this power can injure eyes and skin. Follow your "
           "local laser-safety program and its officer, and the codes that apply "
           "(e.g. IEC 60825-1, ANSI Z136.1); wear eyewear rated for each wavelength.")


def caution_for(name, power, wavelength):
    """Cautions for one beam (power in W, vacuum wavelength in m); empty if none apply."""
    nm = wavelength * 1e9
    out = []
    visible = VISIBLE[0] <= wavelength <= VISIBLE[1]
    if power > LIMIT_3B:
        out.append(f"{name}: {power * 1e3:.4g} mW at {nm:.1f} nm is above 500 mW: Class 4 "
                   "range (IEC 60825-1); diffuse reflections and skin and fire hazards.")
    elif power > LIMIT_3R and visible:
        out.append(f"{name}: {power * 1e3:.4g} mW at {nm:.1f} nm is above 5 mW in the visible: "
                   "Class 3B range or higher (IEC 60825-1); direct and specular "
                   "viewing is hazardous.")
    if wavelength < VISIBLE[0]:
        out.append(f"{name}: {nm:.1f} nm is ultraviolet: invisible, hazardous to eyes and skin "
                   "at low power; use enclosures and UV-rated eyewear.")
    elif wavelength > VISIBLE[1]:
        out.append(f"{name}: {nm:.1f} nm is near or beyond the edge of vision: the beam may "
                   "look dim or invisible while it is hazardous.")
    return out


def cautions(setup, powers=None):
    """All cautions for a setup's beams; ``powers`` (name -> W) overrides beam powers,
    for proposed powers that are not in the setup."""
    from .lines import line

    out = []
    for b in setup.beams:
        p = b.power if powers is None or b.name not in powers else powers[b.name]
        if p is None:
            continue
        out += caution_for(b.name, p, line(setup.scheme, b.lower, b.upper).wavelength)
    if setup.beams:
        out.append(GENERAL)
    return out

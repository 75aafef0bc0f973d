"""A small library of textbook materials near room temperature.

Values are for about 300 K, taken (from memory) from the property tables of
Incropera, DeWitt, Bergman & Lavine, *Fundamentals of Heat and Mass
Transfer*, 6th ed., Table A.1 (metallic solids) and Table A.3 (common
nonmetallic materials). They are starting points to be checked against the
supplier's data for the actual grade.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

from heatsoak.core.errors import InputError

#: Where the values come from, shown beside them in the UI.
SOURCE_NOTE = "Incropera et al., Fundamentals of Heat and Mass Transfer, 6th ed., Tables A.1/A.3, 300 K (from memory)"


@dataclass(frozen=True)
class LibraryMaterial:
    """One entry of the library.

    Attributes
    ----------
    key : str
        Short identifier used in case files and the UI.
    name : str
        Plain name.
    density : float
        [kg/m3]
    specific_heat : float
        [J/(kg K)]
    conductivity : float
        [W/(m K)]
    source : str
        Table the values come from.
    """

    key: str
    name: str
    density: float
    specific_heat: float
    conductivity: float
    source: str

    @property
    def diffusivity(self) -> float:
        """kappa / (rho c) [m2/s]."""
        return self.conductivity / (self.density * self.specific_heat)

    def as_case(self) -> dict:
        """The material as a case-file ``material.<region>`` table."""
        return {
            "density": self.density,
            "specific_heat": self.specific_heat,
            "conductivity": self.conductivity,
            "label": f"{self.name} ({self.source})",
        }


_A1 = "Incropera 6th ed. Table A.1, 300 K (from memory)"
_A3 = "Incropera 6th ed. Table A.3, 300 K (from memory)"

#: The library, keyed by :attr:`LibraryMaterial.key`.
LIBRARY = {
    m.key: m
    for m in (
        LibraryMaterial("carbon_steel", "Plain carbon steel (AISI 1010)", 7832.0, 434.0, 63.9, _A1),
        LibraryMaterial("stainless_304", "Stainless steel AISI 304", 7900.0, 477.0, 14.9, _A1),
        LibraryMaterial("aluminium", "Aluminium, pure", 2702.0, 903.0, 237.0, _A1),
        LibraryMaterial("aluminium_2024", "Aluminium alloy 2024-T6", 2770.0, 875.0, 177.0, _A1),
        LibraryMaterial("copper", "Copper, pure", 8933.0, 385.0, 401.0, _A1),
        LibraryMaterial("titanium_6al4v", "Titanium alloy Ti-6Al-4V", 4420.0, 610.0, 7.1, _A1),
        LibraryMaterial("concrete", "Concrete, stone mix", 2300.0, 880.0, 1.4, _A3),
        LibraryMaterial("brick", "Common brick", 1920.0, 835.0, 0.72, _A3),
        LibraryMaterial("glass_plate", "Glass, plate (soda lime)", 2500.0, 750.0, 1.4, _A3),
        LibraryMaterial("granite", "Granite", 2630.0, 775.0, 2.79, _A3),
    )
}


def get_material(key: str) -> LibraryMaterial:
    """The library entry ``key``; InputError naming the known keys otherwise."""
    try:
        return LIBRARY[key]
    except KeyError:
        raise InputError(f"material {key!r} is not in the library; known: {', '.join(LIBRARY)}") from None


def library_rows() -> list[dict]:
    """The library as plain dicts (for tables and menus), in library order."""
    return [asdict(m) | {"diffusivity": m.diffusivity} for m in LIBRARY.values()]

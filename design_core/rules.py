"""The project's check rules: every default factor, limit and table of the recheck.

Mechanics (the formulas) live in the other modules of ``design_core``; every number an engineer
might change lives here, as data, with the unit and the source written beside it. A project stores
its rules as ``Rules.to_dict()`` and a signed record names the version it was checked with.

Status words used in the sources, as in the team's reference sheet:

* a standard or book with its clause: read in that source or a page quoting it;
* "common practice": a convention of the trade with no single authoritative source;
* "from memory": recalled, not checked against the primary document; check before relying on it.
"""

from __future__ import annotations

from dataclasses import dataclass, field, fields, replace
from typing import Any

from design_core.validate import number

DESIGN_APPROACHES = ("working_stress", "limit_state")
ALPHA_RULES = ("api", "power")
K_RULES = ("jaky", "fixed")
NQ_RULES = ("reissner", "fixed")
LOAD_BASES = ("working", "factored")


def _rule(default: Any, label: str, unit: str, source: str, lo: float | None = None,
          hi: float | None = None, choices: tuple[str, ...] | None = None):
    """A rule field: its default with the label, unit, allowed range and source as metadata."""
    return field(default=default, metadata={
        "label": label, "unit": unit, "source": source, "min": lo, "max": hi, "choices": choices,
    })


@dataclass(frozen=True)
class ExposureClass:
    """One row of the exposure table.

    ``cmin_dur_mm`` is the minimum cover for durability (mm) and ``min_strength_mpa`` the minimum
    characteristic cylinder strength f_ck (MPa) for the class.
    """

    code: str
    cmin_dur_mm: float
    min_strength_mpa: float
    description: str = ""

    def __post_init__(self):
        if not self.code or len(self.code) > 12:
            raise ValueError(f"exposure class code must be 1-12 characters, got {self.code!r}")
        number("cmin_dur_mm", self.cmin_dur_mm, 0.0, 200.0)
        number("min_strength_mpa", self.min_strength_mpa, 0.0, 120.0)


EXPOSURE_SOURCE = (
    "c_min,dur: EN 1992-1-1:2004 Table 4.4N, structural class S4 (XC3 = 25 mm read in a secondary "
    "source; the other rows from memory). Minimum strength: EN 1992-1-1 Annex E Table E.1N "
    "indicative strength classes, f_ck of the cylinder (from memory). Replace with the local table."
)

# EN 1992-1-1 Table 4.4N (S4, reinforcing steel) and Annex E Table E.1N (f_ck, cylinder).
DEFAULT_EXPOSURE = (
    ExposureClass("X0", 10, 12, "no risk of corrosion"),
    ExposureClass("XC1", 15, 20, "carbonation, dry or permanently wet"),
    ExposureClass("XC2", 25, 25, "carbonation, wet, rarely dry (most foundations)"),
    ExposureClass("XC3", 25, 30, "carbonation, moderate humidity"),
    ExposureClass("XC4", 30, 30, "carbonation, cyclic wet and dry"),
    ExposureClass("XD1", 35, 30, "chlorides other than sea water, moderate humidity"),
    ExposureClass("XD2", 40, 30, "chlorides other than sea water, wet, rarely dry"),
    ExposureClass("XD3", 45, 35, "chlorides other than sea water, cyclic wet and dry"),
    ExposureClass("XS1", 35, 30, "airborne sea salt"),
    ExposureClass("XS2", 40, 35, "permanently submerged in sea water"),
    ExposureClass("XS3", 45, 35, "tidal, splash and spray zones"),
)


@dataclass(frozen=True)
class RuleDoc:
    """One rule as shown on the Rules screen and in the record: value, unit and source."""

    name: str
    label: str
    value: Any
    unit: str
    source: str


@dataclass(frozen=True)
class Rules:
    """Every default of the recheck, each with its unit and source.

    Construct with keyword arguments to change any default; values out of range raise
    ``ValueError`` naming the field, the value and the allowed range.
    """

    # --- resistance: working stress or limit state -------------------------------------------
    design_approach: str = _rule(
        "working_stress", "Design approach", "",
        "Project choice: working stress (factors of safety on ultimate) or limit state "
        "(geotechnical resistance factor).", choices=DESIGN_APPROACHES)
    fs_shaft: float = _rule(
        1.5, "Factor of safety on shaft (working stress)", "",
        "Common practice for bored piles in the UK: lesser of Q_u/2.5 and Q_s/1.5 + Q_b/3 "
        "(Tomlinson, Pile Design and Construction Practice; from memory).", 1.0, 10.0)
    fs_base: float = _rule(
        3.0, "Factor of safety on base (working stress)", "",
        "Common practice, as fs_shaft (from memory: Tomlinson).", 1.0, 10.0)
    fs_global: float = _rule(
        2.5, "Global factor of safety (working stress)", "",
        "Common practice, as fs_shaft (from memory: Tomlinson). Design = min(Q_u/FS, "
        "Q_s/FS_s + Q_b/FS_b).", 1.0, 10.0)
    phi_g: float = _rule(
        0.55, "Geotechnical resistance factor phi_g (limit state)", "",
        "AS 2159-2009 range 0.40-0.90 by risk rating (from memory); 0.55 is a moderate-risk "
        "choice, common practice. Check against the project specification.", 0.2, 1.0)
    loads_are: str = _rule(
        "working", "Design loads in the schedule are", "",
        "Project choice. Working loads are compared with working-stress resistance; the "
        "structural and lateral checks multiply them by load_factor.", choices=LOAD_BASES)
    load_factor: float = _rule(
        1.5, "Load factor from working to factored load", "",
        "Common practice for a combined dead + live factor (EN 1990 uses 1.35/1.5, ACI 318-19 "
        "1.2/1.6; from memory).", 1.0, 3.0)

    # --- alpha method (cohesive shaft) ------------------------------------------------------
    alpha_rule: str = _rule(
        "api", "Alpha rule", "",
        "api: alpha = 0.5 psi^-0.5 (psi <= 1), 0.5 psi^-0.25 (psi > 1), psi = c_u/sigma'_v "
        "(API RP 2A-WSD 21st ed. 2000, 6.4.2; Randolph & Murphy 1985). power: alpha = "
        "C (sigma'_v/c_u)^n with C and n given by the engineer.", choices=ALPHA_RULES)
    alpha_c: float = _rule(
        0.5, "Power-law alpha coefficient C", "",
        "Engineer's input; 0.4-0.5 for bored piles, >= 0.5 for driven (common practice).",
        0.05, 2.0)
    alpha_n: float = _rule(
        0.5, "Power-law alpha exponent n", "",
        "Engineer's input; 0.5 reproduces the API psi <= 1 branch.", 0.0, 1.5)
    alpha_max: float = _rule(
        1.0, "Upper limit on alpha", "",
        "API RP 2A-WSD 6.4.2: alpha <= 1.0 (the cap is from memory).", 0.1, 1.5)

    # --- beta method (cohesionless shaft) ---------------------------------------------------
    k_rule: str = _rule(
        "jaky", "Earth pressure coefficient rule", "",
        "jaky: K = K0 = 1 - sin(phi') (Jaky 1944; used with f = K sigma'_v tan(delta) in Das, "
        "Principles of Foundation Engineering, Eq. 11.125). fixed: K = k_fixed.",
        choices=K_RULES)
    k_fixed: float = _rule(
        0.8, "Fixed earth pressure coefficient K", "",
        "Engineer's input; API RP 2A 6.4.3 uses 0.8 for open-ended driven piles (secondary "
        "source).", 0.1, 3.0)
    delta_over_phi: float = _rule(
        2.0 / 3.0, "Interface friction ratio delta/phi'", "",
        "2/3 for cast-in-place concrete on soil (common practice).", 0.3, 1.0)

    # --- depths -------------------------------------------------------------------------------
    exclusion_diameters: float = _rule(
        1.5, "Shaft ignored below the top of the pile, in diameters", "D",
        "Common practice (e.g. FHWA GEC 10 excludes the top 1.5 m; many designers ignore the "
        "top 1.5 D for softening and cap works).", 0.0, 10.0)
    critical_depth_diameters: float = _rule(
        20.0, "Critical depth below ground for sigma'_v in sand, in diameters", "D",
        "Common practice: 10 D loose, 15 D medium, 20 D dense (Rajapakse 2008, citing Vesic "
        "1967 and Meyerhof 1976; secondary). Set 0 to switch the cap off.", 0.0, 100.0)

    # --- base -----------------------------------------------------------------------------
    nc: float = _rule(
        9.0, "Bearing capacity factor N_c for the base in clay", "",
        "Skempton (1951); API RP 2A-WSD eq. 6.4.2-3, q = 9c (secondary source).", 5.0, 12.0)
    nq_rule: str = _rule(
        "reissner", "N_q rule for the base in sand", "",
        "reissner: N_q = e^(pi tan phi') tan^2(45 + phi'/2) (Reissner 1924 / Prandtl; lower than "
        "the deep-pile charts, so conservative). fixed: N_q = nq_fixed.", choices=NQ_RULES)
    nq_fixed: float = _rule(
        40.0, "Fixed N_q", "",
        "Engineer's input; API RP 2A-WSD Table 6.4.3-1 gives 8-50 by density (from memory).",
        1.0, 300.0)
    base_pressure_limit_kpa: float = _rule(
        10_000.0, "Limit on ultimate base pressure in sand", "kPa",
        "API RP 2A-WSD Table 6.4.3-1 q_lim 9.6 MPa for dense sand (from memory); 10-11 MPa is "
        "common practice for bored piles.", 500.0, 50_000.0)

    # --- tension --------------------------------------------------------------------------
    tension_fraction: float = _rule(
        0.75, "Tension shaft as a fraction of compression shaft", "",
        "Common practice; literature spans 0.5-1.0 (O'Neill 2001; Kulhawy 1991).", 0.3, 1.0)
    fs_tension: float = _rule(
        3.0, "Factor of safety on tension shaft (working stress)", "",
        "Common practice for uplift (from memory).", 1.0, 10.0)
    pile_weight_factor: float = _rule(
        0.9, "Factor on the pile's own weight resisting uplift", "",
        "Favourable permanent action, EN 1990 Table A1.2(A) gamma_G,inf = 0.9 (from memory).",
        0.0, 1.0)
    concrete_unit_weight: float = _rule(
        24.0, "Unit weight of concrete", "kN/m3",
        "Common practice (EN 1991-1-1 Table A.1: 24 kN/m3 plain, 25 reinforced; from memory).",
        20.0, 27.0)
    gamma_w: float = _rule(
        9.81, "Unit weight of water", "kN/m3", "Physical constant (1000 kg/m3 x 9.81 m/s2).",
        9.7, 10.1)

    # --- structural --------------------------------------------------------------------------
    min_eccentricity_diameters: float = _rule(
        0.05, "Minimum eccentricity, as a fraction of D", "D",
        "Common practice: e_min = max(0.05 D, 75 mm) on the design axial load.", 0.0, 0.5)
    min_eccentricity_mm: float = _rule(
        75.0, "Minimum eccentricity, absolute", "mm",
        "Common practice: the usual plan tolerance of 75 mm (ICE SPERW 2nd ed. Table B1.4).",
        0.0, 500.0)
    structural_phi: float = _rule(
        0.65, "Strength reduction factor on the nominal section", "",
        "ACI 318-19 Table 21.2.2, compression-controlled tied section (from memory).",
        0.3, 1.0)
    axial_cap_factor: float = _rule(
        0.80, "Cap on nominal axial strength, as a fraction of P_0", "",
        "ACI 318-19 Table 22.4.2.1: P_n,max = 0.80 P_0 for tied members (0.85 with spirals); "
        "phi P_n,max = 0.80 phi P_0. Set another code's equivalent here.", 0.5, 1.0)
    ei_cracked_factor: float = _rule(
        0.7, "Effective EI as a fraction of gross (lateral)", "",
        "ACI 318-19 Table 6.6.3.1.1(a), columns 0.70 I_g (from memory).", 0.2, 1.0)

    # --- lateral ----------------------------------------------------------------------------
    broms_factor: float = _rule(
        2.5, "Factor of safety on Broms ultimate lateral resistance", "",
        "Broms (1964) suggested load factors of 2.0-3.0 on working loads; 2.5 is common "
        "practice.", 1.0, 5.0)
    lateral_deflection_limit_mm: float = _rule(
        25.0, "Head deflection limit under working lateral load", "mm",
        "Common practice for building foundations (10-25 mm); set from the structural "
        "engineer's tolerance.", 1.0, 200.0)
    spring_per_cu: float = _rule(
        67.0, "Lateral subgrade modulus in clay, k = coefficient x c_u", "kPa/kPa",
        "Davisson (1970): k_h D = 67 c_u (from memory).", 10.0, 500.0)
    spring_nh_sand: float = _rule(
        5000.0, "Lateral subgrade modulus gradient in sand n_h", "kN/m3",
        "Terzaghi (1955), medium dense sand, submerged ~4.5 and dry ~7 MN/m3 (from memory).",
        100.0, 100_000.0)

    # --- durability ------------------------------------------------------------------------
    cover_delta_dev_mm: float = _rule(
        10.0, "Allowance for deviation in cover, delta c_dev", "mm",
        "EN 1992-1-1 4.4.1.3(1) recommended value (secondary source).", 0.0, 50.0)
    cover_against_soil_mm: float = _rule(
        75.0, "Minimum nominal cover for concrete cast directly against soil", "mm",
        "EN 1992-1-1 4.4.1.3(4), k2 = 75 mm (UK NA Table NA.1; secondary source).", 0.0, 200.0)
    exposure_table: tuple[ExposureClass, ...] = _rule(
        DEFAULT_EXPOSURE, "Exposure table", "mm / MPa", EXPOSURE_SOURCE)

    # --- tolerances -----------------------------------------------------------------------
    position_tolerance_mm: float = _rule(
        75.0, "Plan position at cut-off", "mm",
        "ICE Specification for Piling and Embedded Retaining Walls, 2nd ed., Table B1.4 "
        "(75 mm in any direction).", 5.0, 500.0)
    inclination_tolerance: float = _rule(
        1.0 / 75.0, "Inclination of a vertical pile (horizontal/vertical)", "",
        "ICE SPERW 2nd ed. Table B1.4: 1 in 75.", 0.001, 0.2)
    cutoff_tolerance_mm: float = _rule(
        50.0, "Cut-off level, either way of design", "mm",
        "Common practice; set from the project specification.", 5.0, 500.0)
    toe_tolerance_mm: float = _rule(
        0.0, "As-built toe allowed above the design toe", "mm",
        "Common practice: the toe must reach the design level.", 0.0, 1000.0)
    diameter_tolerance_mm: float = _rule(
        0.0, "As-built diameter allowed below the design diameter", "mm",
        "Common practice: the shaft must not be smaller than designed.", 0.0, 100.0)
    cage_tolerance_m: float = _rule(
        0.0, "Cage allowed shorter than designed", "m",
        "Common practice: the cage must reach its design length below the cut-off; set from the "
        "project specification.", 0.0, 5.0)
    base_debris_mm: float = _rule(
        38.0, "Base debris, most allowed", "mm",
        "FHWA GEC 10 (Brown, Turner & Castelli 2010) model specification: nowhere more than "
        "1.5 in (38 mm) of sediment (from memory).", 0.0, 300.0)
    volume_ratio_min: float = _rule(
        1.0, "Concrete volume ratio, lowest (actual/theoretical)", "",
        "Common practice: below 1.0 suggests necking or soil inclusion (Cruz, DFI-India 2017, "
        "defines the ratio).", 0.5, 1.5)
    volume_ratio_max: float = _rule(
        1.5, "Concrete volume ratio, highest (actual/theoretical)", "",
        "Common practice: above 1.3-1.5 suggests cavities or concrete loss.", 1.0, 5.0)
    batch_to_discharge_min: float = _rule(
        90.0, "Time from batching to discharge, most allowed", "min",
        "ASTM C94/C94M section 10.7 (editions to 2013): discharge within 1.5 h.", 10.0, 600.0)

    def __post_init__(self):
        for f in fields(self):
            meta = f.metadata
            value = getattr(self, f.name)
            if meta.get("choices"):
                if value not in meta["choices"]:
                    raise ValueError(
                        f"{f.name} must be one of {', '.join(meta['choices'])}, got {value!r}")
            elif f.name == "exposure_table":
                if not value:
                    raise ValueError("exposure_table must hold at least one class")
                codes = [row.code for row in value]
                if len(set(codes)) != len(codes):
                    raise ValueError("exposure_table has a class listed twice")
            else:
                number(f.name, value, meta.get("min"), meta.get("max"))

    # --- lookups -------------------------------------------------------------------------
    def exposure(self, code: str) -> ExposureClass:
        """The exposure table row for ``code``; ValueError naming the known classes if absent."""
        for row in self.exposure_table:
            if row.code == code:
                return row
        known = ", ".join(row.code for row in self.exposure_table)
        raise ValueError(f"exposure_class {code!r} is not in the rules' table ({known})")

    def min_cover_mm(self, code: str, cast_against_soil: bool = True) -> float:
        """Minimum nominal cover (mm) for an exposure class.

        c_nom = c_min,dur + delta c_dev (EN 1992-1-1 4.4.1.1(2) and 4.4.1.3(1)), and not less
        than ``cover_against_soil_mm`` when the concrete is cast directly against soil
        (4.4.1.3(4)).
        """
        c_nom = self.exposure(code).cmin_dur_mm + self.cover_delta_dev_mm
        if cast_against_soil:
            c_nom = max(c_nom, self.cover_against_soil_mm)
        return c_nom

    def min_eccentricity_m(self, diameter_m: float) -> float:
        """Minimum eccentricity (m) = max(fraction x D, absolute); common practice."""
        return max(self.min_eccentricity_diameters * diameter_m, self.min_eccentricity_mm / 1000.0)

    # --- storage and display ----------------------------------------------------------------
    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict of every rule (the exposure table as a list of dicts)."""
        out: dict[str, Any] = {}
        for f in fields(self):
            value = getattr(self, f.name)
            if f.name == "exposure_table":
                value = [
                    {"code": r.code, "cmin_dur_mm": r.cmin_dur_mm,
                     "min_strength_mpa": r.min_strength_mpa, "description": r.description}
                    for r in value
                ]
            out[f.name] = value
        return out

    def __hash__(self) -> int:
        # Rules key the analyses kept between calls (design_core.axial.shaft_profile): hash the
        # fields once per object, not on every lookup. Equality stays the dataclass's.
        h = self.__dict__.get("_hash")
        if h is None:
            h = hash(tuple(getattr(self, f.name) for f in fields(self)))
            object.__setattr__(self, "_hash", h)
        return h

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> "Rules":
        """Rules from a dict as made by ``to_dict``; missing keys take the default.

        Unknown keys raise ValueError naming them, so a typo never silently falls back.
        """
        names = {f.name for f in fields(cls)}
        unknown = sorted(set(data) - names)
        if unknown:
            raise ValueError(f"unknown rule(s): {', '.join(unknown)}")
        kwargs = dict(data)
        if "exposure_table" in kwargs:
            kwargs["exposure_table"] = tuple(ExposureClass(**row) for row in kwargs["exposure_table"])
        return cls(**kwargs)

    def with_changes(self, **changes: Any) -> "Rules":
        """A copy with some rules changed (validated again)."""
        return replace(self, **changes)

    @classmethod
    def describe_defaults(cls) -> list[RuleDoc]:
        """The documentation of every rule, from the defaults."""
        return cls().describe()

    def describe(self) -> list[RuleDoc]:
        """Every rule with its label, current value, unit and source, in declaration order."""
        return [
            RuleDoc(f.name, f.metadata["label"], getattr(self, f.name), f.metadata["unit"],
                    f.metadata["source"])
            for f in fields(self)
        ]

    @staticmethod
    def field_meta(name: str) -> dict[str, Any]:
        """Label, unit, source, min, max and choices of one rule (for forms)."""
        for f in fields(Rules):
            if f.name == name:
                return dict(f.metadata)
        raise KeyError(name)


def rules_markdown_table(rules: Rules | None = None) -> str:
    """A Markdown table of every rule: name, label, default value, unit and source.

    README.md carries this table between ``<!-- rules:start -->`` and ``<!-- rules:end -->``;
    ``tests/test_docs.py`` fails when it is out of date.
    """
    rules = rules or Rules()
    lines = ["| rule | what | default | unit | source |", "|---|---|---|---|---|"]
    for doc in rules.describe():
        if doc.name == "exposure_table":
            value = "; ".join(f"{r.code} {r.cmin_dur_mm:g} mm / C{r.min_strength_mpa:g}"
                              for r in doc.value)
        elif isinstance(doc.value, float):
            value = f"{doc.value:.4g}"
        else:
            value = str(doc.value)
        source = doc.source.replace("|", "/")
        lines.append(f"| `{doc.name}` | {doc.label} | {value} | {doc.unit} | {source} |")
    return "\n".join(lines)

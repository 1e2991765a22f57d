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
TOLERANCE_RULE_SETS = ("ice_sperw", "en_1536")


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

    # --- in situ tests, rock sockets and load tests (design_core.cpt, .spt, .rock, .loadtest) -
    cpt_method: str = _rule(
        "lcpc", "Design method from CPT soundings", "",
        "lcpc: Bustamante & Gianeselli (1982), Pile bearing capacity prediction by means of "
        "static penetrometer CPT, Proc. ESOPT II. eslami_fellenius: Eslami & Fellenius (1997), "
        "Can. Geotech. J. 34. Project choice: use the design's own method.",
        choices=("lcpc", "eslami_fellenius"))
    lcpc_table: str = _rule(
        "lcpc_1982", "LCPC k_c, alpha and f_max table", "",
        "Bustamante & Gianeselli (1982) tables of k_c (base), alpha and f_max (shaft) by soil "
        "category and pile group, values from memory as reproduced in textbooks; the table "
        "is printed in design_core.cpt.LCPC_TABLE. Check against the paper.",
        choices=("lcpc_1982",))
    lcpc_window_diameters: float = _rule(
        1.5, "LCPC: q_ca averaged this far above and below the toe", "D",
        "Bustamante & Gianeselli (1982): a = 1.5 D either side of the toe (secondary source).",
        0.5, 5.0)
    lcpc_clip_low: float = _rule(
        0.7, "LCPC: readings below this fraction of the first mean dropped", "",
        "Bustamante & Gianeselli (1982): q_c outside 0.7-1.3 q'_ca dropped before averaging "
        "again (secondary source).", 0.1, 1.0)
    lcpc_clip_high: float = _rule(
        1.3, "LCPC: readings above this multiple of the first mean dropped", "",
        "Bustamante & Gianeselli (1982), as lcpc_clip_low (secondary source).", 1.0, 5.0)
    ef_above_diameters: float = _rule(
        8.0, "Eslami & Fellenius: toe zone above the toe", "D",
        "Eslami & Fellenius (1997): 8 b above the toe, 2 b when the pile enters a denser layer "
        "from a weaker one (secondary source); 8 b is the lower, conservative case.", 1.0, 20.0)
    ef_below_diameters: float = _rule(
        4.0, "Eslami & Fellenius: toe zone below the toe", "D",
        "Eslami & Fellenius (1997): 4 b below the toe (secondary source).", 1.0, 10.0)
    ef_ct_diameter_m: float = _rule(
        0.4, "Eslami & Fellenius: toe coefficient C_t = 1 up to this diameter, 1/(3 b) above", "m",
        "Toe coefficient C_t = 1 (Eslami & Fellenius 1997); C_t = 1/(3 b), b in m, for larger "
        "piles (Fellenius, Basics of Foundation Design; from memory).", 0.1, 3.0)
    ef_rf_sand_pct: float = _rule(
        0.6, "Eslami & Fellenius: sand when f_s/q_E is at most", "%",
        "A simplification of the Eslami & Fellenius (1997) soil profiling chart to lines of "
        "constant f_s/q_E; threshold from memory: digitise the chart before relying on it, or "
        "give the soil type by layer.", 0.05, 10.0)
    ef_rf_sandy_silt_pct: float = _rule(
        1.2, "Eslami & Fellenius: sandy silt when f_s/q_E is at most", "%",
        "As ef_rf_sand_pct (chart simplified to constant f_s/q_E; from memory).", 0.05, 10.0)
    ef_rf_silty_clay_pct: float = _rule(
        2.5, "Eslami & Fellenius: silty clay when f_s/q_E is at most (clay above)", "%",
        "As ef_rf_sand_pct (chart simplified to constant f_s/q_E; from memory). Zone 1, "
        "sensitive soil, is never assigned by the ratio: give it by layer.", 0.05, 20.0)
    ef_cs_sensitive: float = _rule(
        0.08, "Eslami & Fellenius C_s, zone 1 sensitive and collapsible clay and silt", "",
        "Eslami & Fellenius (1997) shaft coefficient C_s (from memory).", 0.0, 0.2)
    ef_cs_clay: float = _rule(
        0.05, "Eslami & Fellenius C_s, zone 2 clay", "",
        "Eslami & Fellenius (1997) shaft coefficient C_s (from memory).", 0.0, 0.2)
    ef_cs_silty_clay: float = _rule(
        0.025, "Eslami & Fellenius C_s, zone 3 silty clay, stiff clay and silt", "",
        "Eslami & Fellenius (1997) shaft coefficient C_s (from memory).", 0.0, 0.2)
    ef_cs_sandy_silt: float = _rule(
        0.01, "Eslami & Fellenius C_s, zone 4 sandy silt and silt", "",
        "Eslami & Fellenius (1997) shaft coefficient C_s (from memory).", 0.0, 0.2)
    ef_cs_sand: float = _rule(
        0.004, "Eslami & Fellenius C_s, zone 5 fine to coarse sand", "",
        "Eslami & Fellenius (1997) shaft coefficient C_s (from memory).", 0.0, 0.2)
    cone_area_ratio: float = _rule(
        0.8, "Cone net area ratio a (q_t = q_c + u_2 (1 - a))", "",
        "Lunne, Robertson & Powell (1997), CPT in Geotechnical Practice; 0.7-0.85 is typical, "
        "set from the cone's calibration (common practice).", 0.5, 1.0)
    sounding_distance_m: float = _rule(
        30.0, "Nearest sounding used within", "m",
        "Project choice (common practice: a sounding within the zone it represents); beyond it "
        "the engineer assigns a sounding or the check is not made.", 0.0, 1000.0)
    spt_reference_energy_pct: float = _rule(
        60.0, "Reference hammer energy ratio for N60", "%",
        "N60 = N ER/60 (Skempton 1986; ASTM D4633 energy measurement; secondary source).",
        30.0, 100.0)
    spt_base_ld_coefficient_kpa: float = _rule(
        40.0, "Meyerhof SPT base: q_b = coefficient x N60 x L_b/D", "kPa",
        "Meyerhof (1976), J. Geotech. Eng. Div. ASCE 102(GT3): q_b = 0.4 p_a N (L_b/D) in sand "
        "(from memory, as quoted by Das, Principles of Foundation Engineering).", 0.0, 200.0)
    spt_base_limit_kpa: float = _rule(
        400.0, "Meyerhof SPT base limit: q_b at most coefficient x N60", "kPa",
        "Meyerhof (1976): Q_u = 400 N A_b + 2 N A_s kN for displacement piles (secondary "
        "source); q_b <= 4 p_a N.", 0.0, 2000.0)
    spt_shaft_coefficient_kpa: float = _rule(
        2.0, "Meyerhof SPT shaft: f_s = coefficient x mean N60 (displacement piles)", "kPa",
        "Meyerhof (1976): 2 N A_s for displacement piles, N A_s for H piles (secondary "
        "source).", 0.0, 20.0)
    spt_shaft_limit_kpa: float = _rule(
        100.0, "Meyerhof SPT shaft limit", "kPa",
        "Meyerhof (1976): f_s <= 1 tsf (about 100 kPa) for displacement piles (from memory).",
        0.0, 500.0)
    spt_nondisplacement_base_fraction: float = _rule(
        1.0 / 3.0, "Meyerhof SPT: base of bored, CFA and screw piles as a fraction", "",
        "Meyerhof (1976): bored piles Q_u = 133 N A_b + 0.67 N A_s, about 1/3 of the driven "
        "values (secondary source). Screw piles take it too (conservative).", 0.05, 1.0)
    spt_nondisplacement_shaft_fraction: float = _rule(
        1.0 / 3.0, "Meyerhof SPT: shaft of bored, CFA and screw piles as a fraction", "",
        "Meyerhof (1976), as spt_nondisplacement_base_fraction (secondary source).", 0.05, 1.0)
    spt_base_above_diameters: float = _rule(
        10.0, "Meyerhof SPT: base N averaged from this far above the toe", "D",
        "N near the pile point, about 10 D above and 4 D below (Das, Principles of Foundation "
        "Engineering, quoting Meyerhof 1976; from memory).", 0.0, 20.0)
    spt_base_below_diameters: float = _rule(
        4.0, "Meyerhof SPT: base N averaged to this far below the toe", "D",
        "As spt_base_above_diameters (from memory).", 0.0, 10.0)
    rock_socket_rule: str = _rule(
        "rowe_armitage", "Rock socket side resistance rule", "",
        "rowe_armitage: f_s = 0.45 sqrt(q_u) smooth, 0.6 sqrt(q_u) rough, MPa (Rowe & Armitage "
        "1987, Can. Geotech. J. 24). kulhawy_prakoso: f_s/p_a = C sqrt(q_u/p_a) (Kulhawy & "
        "Prakoso 2005). Both from memory.", choices=("rowe_armitage", "kulhawy_prakoso"))
    rock_ra_smooth: float = _rule(
        0.45, "Rowe & Armitage coefficient, smooth socket", "MPa^0.5",
        "Rowe & Armitage (1987): f_s = 0.45 sqrt(q_u) MPa, smooth sockets (from memory).",
        0.05, 2.0)
    rock_ra_rough: float = _rule(
        0.6, "Rowe & Armitage coefficient, rough socket", "MPa^0.5",
        "Rowe & Armitage (1987): f_s = 0.6 sqrt(q_u) MPa, rough sockets (from memory).",
        0.05, 2.0)
    rock_kp_c: float = _rule(
        1.0, "Kulhawy & Prakoso coefficient C", "",
        "Kulhawy & Prakoso (2005), f_s/p_a = C sqrt(q_u/p_a), C about 1 for normal sockets "
        "(from memory).", 0.1, 3.0)
    rock_base_factor: float = _rule(
        2.5, "Rock socket base: q_b = factor x q_u", "",
        "Rowe & Armitage (1987): end bearing 2.5 q_u for sound rock (from memory).", 0.1, 10.0)
    rock_rqd_min_pct: float = _rule(
        50.0, "Lowest RQD for the q_u rules", "%",
        "Common practice: the q_u correlations assume a sound rock mass; below this RQD the "
        "socket is not checked from q_u (use the report's values).", 0.0, 100.0)
    load_test_fit_r2_min: float = _rule(
        0.95, "Load test: least r^2 of a Chin, Brinch Hansen or De Beer line", "",
        "Common practice: a hyperbolic fit is trusted only when the points lie on a line.",
        0.5, 1.0)
    load_test_fit_from_fraction: float = _rule(
        0.5, "Load test: lines fitted to the points above this fraction of the highest load", "",
        "Common practice (Chin 1970 fits the later, straight part of s/Q against s).",
        0.0, 0.95)
    load_test_davisson_offset_mm: float = _rule(
        3.8, "Davisson offset, constant part", "mm",
        "Davisson (1972): s = Q L/(A E) + 3.8 mm + D/120 (Fellenius 2001; secondary source).",
        0.0, 50.0)
    load_test_davisson_diameter_divisor: float = _rule(
        120.0, "Davisson offset, D divided by", "",
        "Davisson (1972), as load_test_davisson_offset_mm (secondary source).", 10.0, 1000.0)
    load_test_creep_rate_mm_per_h: float = _rule(
        0.25, "Load test hold: settlement rate at the end of a hold, most", "mm/h",
        "ASTM D1143/D1143M maintained load procedure: hold until the rate is at most 0.25 mm/h "
        "(from memory); set from the project specification.", 0.0, 50.0)
    csl_fat_anomaly_pct: float = _rule(
        10.0, "CSL: first-arrival-time increase above which a pair is an anomaly", "%",
        "Crosshole sonic logging rating bands used with ASTM D6760: good 0-10 %, questionable "
        "11-20 %, flaw 21-30 %, defect > 30 % (from memory).", 0.0, 100.0)
    csl_fat_defect_pct: float = _rule(
        30.0, "CSL: first-arrival-time increase above which a pair is a defect", "%",
        "As csl_fat_anomaly_pct (ASTM D6760 practice; from memory).", 0.0, 200.0)
    csl_energy_anomaly_db: float = _rule(
        6.0, "CSL: energy reduction from which a pair is an anomaly", "dB",
        "Rating bands used with ASTM D6760: good < 6 dB, questionable < 9 dB, flaw 9-12 dB, "
        "defect > 12 dB (from memory).", 0.0, 60.0)
    csl_energy_defect_db: float = _rule(
        12.0, "CSL: energy reduction above which a pair is a defect", "dB",
        "As csl_energy_anomaly_db (ASTM D6760 practice; from memory).", 0.0, 60.0)

    # --- driven piles: the driving record (design_core.driving) ---------------------------
    driving_set_max_mm_per_10: float = _rule(
        0.0, "Driving criterion: most final set per 10 blows (project default)", "mm",
        "Engineer's input from a wave-equation analysis or a dynamic test of the project; 0 means "
        "no project default, so each pile or group must carry its own criterion (no safe generic "
        "value exists).", 0.0, 200.0)
    driving_criterion_energy_kj: float = _rule(
        0.0, "Driving criterion: rated hammer energy per blow it was set for", "kJ",
        "Engineer's input with driving_set_max_mm_per_10 (the energy of the analysis or test "
        "that gave the set); 0 means not set.", 0.0, 2000.0)
    driving_min_sets: int = _rule(
        3, "Final sets measured for acceptance (the worst of the last ones governs)", "",
        "Common practice: the set over the last 10 blows measured at least three times in "
        "succession (ICE SPERW 2nd ed. and Tomlinson, Pile Design and Construction Practice, "
        "set per 10 blows; secondary).", 1, 20)
    driving_refusal_blows_per_250mm: float = _rule(
        100.0, "Refusal: blows per 0.25 m above which driving is at refusal", "blows",
        "About 10 blows per 25 mm (10 blows per inch) is often treated as practical refusal (a "
        "US state DOT driven-pile manual, secondary; FHWA NHI-05-042 Hannigan et al. 2006, from "
        "memory): 100 blows per 250 mm.", 10.0, 2000.0)
    gates_phi: float = _rule(
        0.40, "Resistance factor on the FHWA-modified Gates formula (limit state)", "",
        "AASHTO LRFD Bridge Design Specifications Table 10.5.5.2.3-1, FHWA-modified Gates, end of "
        "drive (from memory; ENR 0.10).", 0.05, 1.0)
    gates_fs: float = _rule(
        3.5, "Factor of safety on the FHWA-modified Gates formula (working stress)", "",
        "FHWA NHI-05-042 (Hannigan et al. 2006), factor of safety 3.5 with the modified Gates "
        "formula (from memory).", 1.0, 10.0)

    # --- CFA piles: the rig's log (design_core.cfa) ------------------------------------------
    cfa_increment_m: float = _rule(
        0.5, "CFA depth increment for concrete volume and effective diameter", "m",
        "FHWA GEC 8 (Brown, Dapp, Thompson & Lazarte 2007) ch. 7: automated monitoring records "
        "volume against depth at intervals of about 0.6 m (2 ft) or less (secondary); 0.5 m is "
        "common practice.", 0.1, 2.0)
    cfa_increment_ratio_min: float = _rule(
        1.0, "CFA increment volume ratio, lowest (placed/theoretical)", "",
        "Common practice: concrete placed in every increment at least the auger's own volume; "
        "FHWA GEC 8 (Brown et al. 2007) ch. 7 describes the increment-by-increment volume check "
        "(secondary); the value 1.0 is common practice, not a GEC 8 limit.", 0.5, 2.0)
    cfa_pressure_min_kpa: float = _rule(
        0.0, "CFA concrete pressure during extraction, must exceed", "kPa",
        "FHWA GEC 8 (Brown et al. 2007) ch. 7: a positive concrete pressure is kept at the auger "
        "while it is withdrawn (secondary); 0 asks for a positive reading at every depth.",
        -100.0, 2000.0)
    cfa_revs_per_pitch_max_cohesive: float = _rule(
        2.0, "CFA auger revolutions per pitch of penetration, most in clay", "rev",
        "FHWA GEC 8 (Brown et al. 2007) ch. 7: 2-3 revolutions per pitch in clay (secondary); "
        "the lower end is taken (conservative).", 1.0, 10.0)
    cfa_revs_per_pitch_max_cohesionless: float = _rule(
        1.5, "CFA auger revolutions per pitch of penetration, most in sand and gravel", "rev",
        "FHWA GEC 8 (Brown et al. 2007) ch. 7: 1.5-2 revolutions per pitch in cohesionless soil "
        "(secondary); the lower end is taken (conservative). Also used where the soil is not "
        "known.", 1.0, 10.0)
    cfa_integrity_test_fraction: float = _rule(
        0.2, "Fraction of CFA piles to integrity-test", "",
        "FHWA GEC 8 (Brown et al. 2007) section 7.5.1: 10-20 % of production piles (secondary); "
        "the upper end is taken (conservative).", 0.0, 1.0)

    # --- screw (helical) piles: installation torque (design_core.helical) -------------------
    helical_kt_small_per_m: float = _rule(
        33.0, "Torque factor K_t, square shafts and round shafts under 89 mm", "1/m",
        "Hoyt & Clemence (1989) 10 ft^-1; ICC-ES AC358 default (secondary). The engineer "
        "confirms with load tests.", 1.0, 100.0)
    helical_kt_89_per_m: float = _rule(
        23.0, "Torque factor K_t, 89 mm (3.5 in) round shafts", "1/m",
        "Hoyt & Clemence (1989) 7 ft^-1; ICC-ES AC358 default (secondary).", 1.0, 100.0)
    helical_kt_large_per_m: float = _rule(
        9.8, "Torque factor K_t, round shafts larger than 89 mm", "1/m",
        "Hoyt & Clemence (1989) 3 ft^-1 for 219 mm (8 5/8 in) round shafts (from memory); used "
        "for every round shaft above 89 mm (conservative) unless the engineer gives K_t.",
        1.0, 100.0)
    helical_final_readings: int = _rule(
        3, "Final torque: readings averaged", "",
        "Common practice (ICC-ES AC358 style acceptance): the average of the last readings; "
        "engineer to confirm.", 1, 20)
    helical_final_length_m: float = _rule(
        1.0, "Final torque: readings taken from the last length installed", "m",
        "Common practice: the final torque over the last 1 m (about 3 ft) of installation.",
        0.1, 5.0)
    helical_fs: float = _rule(
        2.0, "Factor of safety on torque-correlated capacity (working stress)", "",
        "ICC-ES AC358: allowable = K_t T / 2 (from memory).", 1.0, 10.0)
    helical_phi: float = _rule(
        0.5, "Resistance factor on torque-correlated capacity (limit state)", "",
        "Common practice, the reciprocal of the working-stress factor of 2 (no published "
        "resistance factor confirmed); check against the project specification.", 0.1, 1.0)
    helical_spacing_min_diameters: float = _rule(
        3.0, "Helix spacing for individual bearing, least, in helix diameters", "D",
        "Hoyt & Clemence (1989): helices 3 diameters or more apart act individually (secondary); "
        "closer helices act as a cylinder.", 1.0, 10.0)

    # --- failure modes: settlement, downdrag, group, buckling, swelling, cone, tolerances ----
    settlement_limit_mm: float = _rule(
        10.0, "Head settlement under the working load, most allowed", "mm",
        "Common practice for a single pile at working load (10 mm); set from the structural "
        "engineer's tolerance.", 1.0, 200.0)
    settlement_limit_diameters: float = _rule(
        0.0, "Head settlement limit as a fraction of D (0: not used)", "D",
        "Common practice: 1 % of D is a usual alternative (0.01); when set, the lesser of the "
        "two limits governs.", 0.0, 0.2)
    pile_modulus_mpa: float = _rule(
        30_000.0, "Young's modulus of the pile E_p", "MPa",
        "EN 1992-1-1 Table 3.1 gives E_cm 30-35 GPa for C25/30-C40/50 (from memory); 30 GPa "
        "is common practice for the long-term shaft of a bored pile.", 5_000.0, 210_000.0)
    soil_poisson_ratio: float = _rule(
        0.3, "Poisson's ratio of the soil nu (settlement)", "",
        "Common practice: 0.3 drained, 0.5 undrained (Fleming et al., Piling Engineering, "
        "ch. 6; from memory).", 0.0, 0.5)
    dragload_factor: float = _rule(
        1.4, "Load factor on the dragload in the structural check", "",
        "AASHTO LRFD Table 3.4.1-2, downdrag DD, piles by the alpha method: 1.4 at most (from "
        "memory). Fellenius combines the dragload with the permanent load only, unfactored; "
        "1.0 reproduces that.", 1.0, 2.0)
    block_fs: float = _rule(
        2.5, "Factor of safety on block failure of a group (working stress)", "",
        "Common practice: 2.5-3 on the ultimate block capacity (Tomlinson, Pile Design and "
        "Construction Practice; from memory).", 1.0, 10.0)
    block_nc_max: float = _rule(
        9.0, "Upper limit of N_c for the base of a block", "",
        "Skempton (1951): N_c = 5(1 + 0.2 D/B)(1 + 0.2 B/L), D/B taken at most 2.5, so N_c "
        "<= 9 (secondary source).", 5.0, 9.0)
    buckling_ei_factor: float = _rule(
        0.4, "Effective EI for buckling as a fraction of E_p I_g", "",
        "ACI 318-19 6.6.4.4.4(a): EI_eff = 0.4 E_c I_g / (1 + beta_dns), beta_dns = 0 taken "
        "(from memory).", 0.1, 1.0)
    buckling_stiffness_factor: float = _rule(
        0.75, "Fraction of the Euler load the factored load may reach", "",
        "ACI 318-19 6.6.4.5.2: P_u < 0.75 P_c, the stiffness reduction factor (from memory).",
        0.3, 1.0)
    buckling_k_free: float = _rule(
        2.1, "Effective length factor, head free (cantilever from the point of fixity)", "",
        "Theory 2.0; AISC 360 Commentary Table C-A-7.1 recommends 2.1 for design (from "
        "memory).", 1.0, 3.0)
    buckling_k_fixed: float = _rule(
        1.2, "Effective length factor, head fixed in rotation, free to sway", "",
        "Theory 1.0; AISC 360 Commentary Table C-A-7.1 recommends 1.2 for design (from "
        "memory).", 0.5, 3.0)
    fixity_r_factor: float = _rule(
        1.4, "Depth to fixity over R, soil modulus constant with depth", "R",
        "Davisson & Robinson (1965): about 1.4 R, R = (E_p I / k_h)^(1/4) (from memory).",
        0.5, 5.0)
    fixity_t_factor: float = _rule(
        1.8, "Depth to fixity over T, soil modulus rising linearly with depth", "T",
        "Davisson & Robinson (1965): about 1.8 T, T = (E_p I / n_h)^(1/5) (from memory).",
        0.5, 5.0)
    swell_shaft_coefficient: float = _rule(
        0.5, "Uplift friction over swell pressure in the swelling zone", "",
        "Engineer's input, common practice: f_sw = coefficient x lateral swell pressure (the "
        "tangent of the interface friction angle). Not used when a unit uplift friction is "
        "given.", 0.05, 1.5)
    cone_half_angle_deg: float = _rule(
        30.0, "Half-angle of the pull-out cone from the toe, from the vertical", "deg",
        "Common practice: 30 degrees for fissured rock and stiff fissured clay (Tomlinson, "
        "Pile Design and Construction Practice, uplift of rock sockets; from memory).",
        0.0, 60.0)
    tolerance_rule_set: str = _rule(
        "ice_sperw", "Tolerance rule set", "",
        "ice_sperw: ICE Specification for Piling and Embedded Retaining Walls, 2nd ed., Table "
        "B1.4. en_1536: EN 1536:2010 section 8 (from memory).", choices=TOLERANCE_RULE_SETS)
    position_allowance_per_m_mm: float = _rule(
        0.0, "Position allowance per metre of cut-off below the commencing surface (0: the "
        "permitted inclination)", "mm/m",
        "ICE SPERW 2nd ed. Table B1.4: 75 mm plus an allowance for rake and verticality below "
        "the commencing surface (secondary source); 0 takes the pile's permitted inclination "
        "(13.3 mm/m at 1 in 75). Check against the edition used.", 0.0, 100.0)
    rake_boundary: float = _rule(
        1.0 / 6.0, "Rake dividing the two raking tolerances (horizontal/vertical)", "",
        "ICE SPERW 2nd ed. Table B1.4: rakes up to 1:6 and over 1:6 (secondary source).",
        0.01, 1.0)
    rake_tolerance_shallow: float = _rule(
        1.0 / 25.0, "Deviation from the design rake, rake up to the boundary", "",
        "ICE SPERW 2nd ed. Table B1.4: 1 in 25 (secondary source).", 0.001, 0.2)
    rake_tolerance_steep: float = _rule(
        1.0 / 15.0, "Deviation from the design rake, rake over the boundary", "",
        "ICE SPERW 2nd ed. Table B1.4: 1 in 15 (secondary source).", 0.001, 0.3)
    en1536_position_small_mm: float = _rule(
        100.0, "EN 1536 plan position, D up to 1.0 m", "mm",
        "EN 1536:2010 section 8: e <= 0.10 m for D <= 1.0 m (from memory; some summaries read "
        "0.1 D here: check the edition used).", 5.0, 500.0)
    en1536_position_fraction: float = _rule(
        0.1, "EN 1536 plan position, 1.0 m < D <= 1.5 m, as a fraction of D", "D",
        "EN 1536:2010 section 8: e <= 0.1 D (from memory).", 0.01, 0.5)
    en1536_position_large_mm: float = _rule(
        150.0, "EN 1536 plan position, D over 1.5 m", "mm",
        "EN 1536:2010 section 8: e <= 0.15 m (from memory).", 5.0, 500.0)
    en1536_inclination_vertical: float = _rule(
        0.02, "EN 1536 inclination, vertical piles and rakes n >= 15", "",
        "EN 1536:2010 section 8: 0.02 (from memory).", 0.001, 0.2)
    en1536_inclination_raking: float = _rule(
        0.04, "EN 1536 inclination, rakes 4 <= n < 15", "",
        "EN 1536:2010 section 8: 0.04 (from memory).", 0.001, 0.3)

    # --- tests after installation: how many piles of each type (fieldapp.pile_tests) ---------
    # The share of piles of a type that need each test; cfa integrity is
    # cfa_integrity_test_fraction above. Shares round up to whole piles.
    test_integrity_fraction_bored: float = _rule(
        1.0, "Fraction of bored piles to integrity-test", "",
        "Common practice (UK, ICE SPERW 3rd ed. 2017, from memory): every bored pile is "
        "integrity tested; set from the project specification.", 0.0, 1.0)
    test_integrity_fraction_driven: float = _rule(
        0.0, "Fraction of driven piles to integrity-test", "",
        "Common practice: driven piles are proved by their driving record and dynamic tests; "
        "set from the project specification.", 0.0, 1.0)
    test_integrity_fraction_screw: float = _rule(
        0.0, "Fraction of screw piles to integrity-test", "",
        "Common practice: steel screw piles are proved by torque and load tests.", 0.0, 1.0)
    test_dynamic_fraction_driven: float = _rule(
        0.05, "Fraction of driven piles to test with high-strain dynamic tests", "",
        "FHWA GEC 12 (Hannigan et al. 2016), dynamic monitoring of a share of production piles, "
        "a few percent (from memory); set from the project specification.", 0.0, 1.0)
    test_static_per_type: float = _rule(
        1.0, "Static load tests per pile type used on the project, at least", "tests",
        "Common practice: at least one static (preliminary or proof) test per pile type; "
        "EN 1997-1 7.5 asks for load tests where design is not proved by experience "
        "(from memory).", 0.0, 100.0)
    test_dynamic_compression_fraction_steel: float = _rule(
        0.9, "Dynamic test: most compression and tension stress in steel, fraction of f_y", "",
        "AASHTO LRFD 10.7.8: 0.9 f_y for steel piles during driving (from memory).", 0.1, 1.0)
    test_dynamic_compression_fraction_concrete: float = _rule(
        0.85, "Dynamic test: most compression stress in concrete, fraction of f_c", "",
        "AASHTO LRFD 10.7.8: 0.85 f'c for concrete piles during driving (from memory).",
        0.1, 1.0)
    test_dynamic_tension_sqrt_concrete: float = _rule(
        0.25, "Dynamic test: most tension stress in concrete, factor on sqrt(f_c) in MPa", "MPa^0.5",
        "AASHTO LRFD 10.7.8: 0.25 sqrt(f'c) MPa plus the effective prestress for prestressed "
        "piles (from memory; the prestress is left out, conservative).", 0.0, 2.0)

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

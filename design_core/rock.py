"""Resistance of a pile socketed into rock, from the rock's unconfined compressive strength.

Units: q_u in MPa, p_a in kPa, unit resistances in kPa, lengths and D in m, forces in kN.

* Side resistance, the rules' ``rock_socket_rule``:

  - "rowe_armitage": f_s = 0.45 sqrt(q_u) MPa for smooth sockets, 0.6 sqrt(q_u) MPa for rough
    ones (Rowe & Armitage 1987, "A design method for drilled piers in soft rock", Can.
    Geotech. J. 24: 126-142; from memory);
  - "kulhawy_prakoso": f_s / p_a = C sqrt(q_u / p_a), C about 1 (Kulhawy & Prakoso 2005,
    "Some observations on modeling of rock socket side resistance", Proc. ICE / ASCE; from
    memory), p_a = 101.325 kPa.

* Base: q_b = 2.5 q_u (Rowe & Armitage 1987, sound rock; from memory), the rules'
  ``rock_base_factor``.
* The correlations assume a sound rock mass: below the rules' ``rock_rqd_min_pct`` the socket
  is not rechecked from q_u (``RockSocket.usable`` is False and says why).

Valid ranges: q_u 0.5-100 MPa (weak to strong rock; the correlations were fitted to soft and
medium rock up to some tens of MPa), RQD 0-100 %, socket length 0-50 m, D 0.1-5 m.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import Any

from design_core.axial import _approach_text, _design, pile_area
from design_core.rules import Rules
from design_core.validate import number

ROUGHNESS_CLASSES = ("smooth", "rough")
QU_RANGE_MPA = (0.5, 100.0)
P_A_KPA = 101.325  # atmospheric pressure


@dataclass(frozen=True)
class RockSocket:
    """Rock at a socket: q_u (MPa, 0.5-100), RQD (%, 0-100) and the roughness class.

    ``roughness`` is "smooth" or "rough" (Rowe & Armitage's two classes: a rough socket has
    grooves or natural roughness beyond the drilling tool's, usually by grooving or by the
    engineer's judgement of the logged rock).
    """

    q_u_mpa: float
    rqd_pct: float
    roughness: str = "smooth"

    def __post_init__(self):
        object.__setattr__(self, "q_u_mpa", number("q_u_mpa", self.q_u_mpa, *QU_RANGE_MPA))
        object.__setattr__(self, "rqd_pct", number("rqd_pct", self.rqd_pct, 0.0, 100.0))
        if self.roughness not in ROUGHNESS_CLASSES:
            raise ValueError(f"roughness must be one of {', '.join(ROUGHNESS_CLASSES)}, "
                             f"got {self.roughness!r}")

    def usable(self, rules: Rules | None = None) -> tuple[bool, str]:
        """(True, "") when the q_u rules apply; (False, why) when the RQD is below the rules'."""
        rules = rules or Rules()
        if self.rqd_pct < rules.rock_rqd_min_pct:
            return False, (f"RQD {self.rqd_pct:g} % is below {rules.rock_rqd_min_pct:g} %: the q_u "
                           "correlations assume a sound rock mass; use the report's values")
        return True, ""

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


def socket_side_resistance(q_u_mpa: float, roughness: str = "smooth",
                           rules: Rules | None = None) -> float:
    """Ultimate unit side resistance f_s (kPa) of a rock socket from q_u (MPa).

    Rowe & Armitage (1987): f_s = c sqrt(q_u) MPa, c = 0.45 smooth / 0.6 rough; or Kulhawy &
    Prakoso (2005): f_s = C p_a sqrt(q_u / p_a) (roughness not used). See the module docstring.
    """
    rules = rules or Rules()
    q_u = number("q_u_mpa", q_u_mpa, *QU_RANGE_MPA)
    if roughness not in ROUGHNESS_CLASSES:
        raise ValueError(f"roughness must be one of {', '.join(ROUGHNESS_CLASSES)}, got {roughness!r}")
    if rules.rock_socket_rule == "rowe_armitage":
        c = rules.rock_ra_rough if roughness == "rough" else rules.rock_ra_smooth
        return c * math.sqrt(q_u) * 1000.0
    return rules.rock_kp_c * P_A_KPA * math.sqrt(q_u * 1000.0 / P_A_KPA)


def socket_base_resistance(q_u_mpa: float, rules: Rules | None = None) -> float:
    """Ultimate unit base resistance q_b = ``rock_base_factor`` x q_u (kPa), q_u in MPa."""
    rules = rules or Rules()
    return rules.rock_base_factor * number("q_u_mpa", q_u_mpa, *QU_RANGE_MPA) * 1000.0


@dataclass(frozen=True)
class SocketResult:
    """Resistance of one rock socket (kN): ``shaft`` over the socket length, ``base`` at the toe.

    ``unit_side`` and ``base_pressure`` in kPa; ``rule`` the side rule used.
    """

    diameter: float
    socket_length: float
    q_u_mpa: float
    rqd_pct: float
    roughness: str
    rule: str
    unit_side: float
    base_pressure: float
    shaft: float
    base: float
    ultimate: float
    design: float
    design_approach: str
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


def socket_capacity(rock: RockSocket, diameter: float, socket_length: float,
                    rules: Rules | None = None, *, include_base: bool = True) -> SocketResult:
    """Ultimate and design resistance (kN) of a socket of D (m, 0.1-5) and length L (m, 0-50).

    Q_s = pi D L f_s, Q_b = q_b pi D^2 / 4 (``include_base=False`` for a socket whose base is not
    cleaned or is not relied on); design by the rules' approach as ``design_core.axial``.
    ValueError when the rock mass is below the rules' RQD (see ``RockSocket.usable``).
    """
    rules = rules or Rules()
    if not isinstance(rock, RockSocket):
        raise ValueError(f"rock must be a RockSocket, got {type(rock).__name__}")
    diameter = number("diameter", diameter, 0.1, 5.0)
    length = number("socket_length", socket_length, 0.0, 50.0)
    ok, why = rock.usable(rules)
    if not ok:
        raise ValueError(why)
    f_s = socket_side_resistance(rock.q_u_mpa, rock.roughness, rules)
    q_b = socket_base_resistance(rock.q_u_mpa, rules) if include_base else 0.0
    shaft = math.pi * diameter * length * f_s
    base = q_b * pile_area(diameter)
    design = float(_design(shaft, base, rules))
    rule = rules.rock_socket_rule
    label = ("Rowe & Armitage 1987" if rule == "rowe_armitage" else "Kulhawy & Prakoso 2005")
    reason = (f"Design {design:.0f} kN ({_approach_text(rules)}) from a {length:.2f} m {rock.roughness} "
              f"socket, f_s {f_s:.0f} kPa ({label}, q_u {rock.q_u_mpa:g} MPa) and base "
              f"{base:.0f} kN (q_b {q_b:.0f} kPa).")
    return SocketResult(diameter, length, rock.q_u_mpa, rock.rqd_pct, rock.roughness, rule, f_s,
                        q_b, shaft, base, shaft + base, design, rules.design_approach, reason)

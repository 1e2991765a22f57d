"""The load test sheet's plot: load (kN, across) against settlement (mm, down), drawn from the
stored interpretation (``design_core.loadtest.LoadTestResult.to_dict`` as the register keeps it).

Drawn: every reading (thin), the virgin curve the methods read (dots), the elastic line
s = Q L/(A E), Davisson's offset line (``design_core.loadtest.davisson_line``), the Chin-Kondner
hyperbola Q = s / (C1 s + C2) where the fit gave an answer, the fit range as a shaded band,
and each answer marked and named (an extrapolated one says so). Nothing here interprets the
test; the values come from design_core.
"""

from __future__ import annotations

import math
from typing import Any

from design_core.loadtest import davisson_line
from design_core.rules import Rules
from fieldapp.pile_test_register import PROOF_ONLY_KINDS
from fieldapp.drawings import (
    DESIGN, INK, MUTED, OK, SHORT, WARN, Axis, Circle, Figure, Line, Polyline, Rect, Text,
    empty_figure, finite, frame, legend_grid, nice_ticks, thin,
)

CHIN = "#5b2a86"
BAND = "#eef2ea"


def load_test_figure(result: dict[str, Any], rules: Rules | None = None, width: float = 520,
                     height: float = 380) -> Figure:
    """The plot of one static load test (module docstring); ``result`` as stored."""
    rules = rules or Rules()
    title = "Load against settlement"
    q = finite(result.get("curve_load_kn") or ())
    s = finite(result.get("curve_settlement_mm") or ())
    if len(q) < 2 or len(q) != len(s):
        return empty_figure(title, "no load-settlement curve stored", width)
    readings = result.get("readings") or {}
    rq, rs = finite(readings.get("load_kn") or ()), finite(readings.get("settlement_mm") or ())
    dav = result.get("davisson_kn")
    chin = result.get("chin") or {}
    hansen = result.get("brinch_hansen") or {}
    beer = result.get("de_beer") or {}
    answers = [v for v in (dav, chin.get("value_kn"), hansen.get("value_kn"), beer.get("value_kn"))
               if isinstance(v, (int, float)) and math.isfinite(v)]
    qmax = max(q + rq + answers) * 1.08 or 1.0
    lateral = result.get("kind") in PROOF_ONLY_KINDS
    geometry = all(isinstance(result.get(k), (int, float)) for k in
                   ("length_m", "area_m2", "e_mpa", "diameter_m")) and not lateral
    line_end = None
    if geometry:
        line_end = float(davisson_line(qmax, result["length_m"], result["area_m2"],
                                       result["e_mpa"], result["diameter_m"], rules))
    smax = max(s + rs + ([line_end] if line_end else []) + [1.0]) * 1.08
    smin = min(s + rs + [0.0])
    plot = (52, 40, width - 14, height - 86)
    x = Axis(0.0, qmax, plot[0], plot[2])
    y = Axis(smin, smax, plot[1], plot[3])
    fig = Figure(width, height, title)
    lo, hi = chin.get("from_load_kn"), chin.get("to_load_kn")
    entries = []
    if isinstance(lo, (int, float)) and isinstance(hi, (int, float)) and hi > lo:
        fig.add(Rect(x(lo), plot[1], x(hi) - x(lo), plot[3] - plot[1], None, BAND))
        entries.append((BAND, f"fit range {lo:.0f}-{hi:.0f} kN", None, "dot"))
    frame(fig, x, y, nice_ticks(0, qmax), nice_ticks(smin, smax), "load (kN)",
          "settlement (mm, down)" if not lateral else "movement of the head (mm)")
    if len(rq) == len(rs) and len(rq) >= 2:
        fig.add(Polyline(thin((x(a), y(b)) for a, b in zip(rq, rs, strict=True)), MUTED, 0.8))
    fig.add(Polyline(thin((x(a), y(b)) for a, b in zip(q, s, strict=True)), INK, 1.6))
    for a, b in zip(q, s, strict=True):
        fig.add(Circle(x(a), y(b), 2.2, None, INK))
    entries.append((INK, "measured (end of each hold)", None, "line"))
    if geometry:
        elastic = result["length_m"] / (result["area_m2"] * result["e_mpa"])
        fig.add(Line(x(0), y(0), x(qmax), y(elastic * qmax), DESIGN, 1.0, (2, 2)))
        start = float(davisson_line(0.0, result["length_m"], result["area_m2"], result["e_mpa"],
                                    result["diameter_m"], rules))
        fig.add(Line(x(0), y(start), x(qmax), y(line_end), WARN, 1.4, (6, 3)))
        entries += [(DESIGN, "elastic line QL/AE", (2, 2), "line"),
                    (WARN, "Davisson offset line", (6, 3), "line")]
    c1, c2 = chin.get("slope"), chin.get("intercept")
    if chin.get("value_kn") is not None and isinstance(c1, float) and isinstance(c2, float):
        pts = []
        for k in range(1, 61):
            ss = smax * k / 60
            den = c1 * ss + c2
            if den > 0 and ss / den <= qmax:
                pts.append((x(ss / den), y(ss)))
        if len(pts) >= 2:
            fig.add(Polyline(tuple(pts), CHIN, 1.2, (4, 2)))
        entries.append((CHIN, f"Chin hyperbola (r2 {chin.get('r2', 0):.3f})", (4, 2), "line"))
    elif chin:
        entries.append((MUTED, "Chin: no answer", None, "dot"))
    _mark_answers(fig, x, y, plot, result, dav, chin, hansen, beer, entries)
    legend_grid(fig, plot[0], plot[3] + 40, width - plot[0] - 4, entries)
    return fig


def _mark_answers(fig, x, y, plot, result, dav, chin, hansen, beer, entries) -> None:
    """Each answer as a marked, named point or line."""
    if isinstance(dav, (int, float)):
        sd = float(davisson_line(dav, result["length_m"], result["area_m2"], result["e_mpa"],
                                 result["diameter_m"]))
        fig.add(Circle(x(dav), y(sd), 4.5, SHORT, None, 2.0),
                Text(x(dav) + 6, y(sd) - 4, f"Davisson {dav:.0f} kN", 8.5, "start", SHORT, True))
        entries.append((SHORT, f"Davisson limit {dav:.0f} kN", None, "dot"))
    else:
        qm, sm = result.get("max_load_kn"), result.get("settlement_at_max_mm")
        if isinstance(qm, (int, float)) and isinstance(sm, (int, float)):
            fig.add(Circle(x(qm), y(sm), 4.5, OK, None, 2.0),
                    Text(x(qm) - 6, y(sm) - 6, f"proof {qm:.0f} kN met", 8.5, "end", OK, True))
            entries.append((OK, "proof load met: no capacity measured", None, "dot"))
    for fit, name in ((chin, "Chin"), (hansen, "Brinch Hansen 80 %"), (beer, "De Beer")):
        value = fit.get("value_kn") if fit else None
        if not isinstance(value, (int, float)):
            continue
        extra = " (extrapolated)" if fit.get("extrapolated") else ""
        su = fit.get("settlement_mm")
        if isinstance(su, (int, float)):
            fig.add(Circle(x(value), y(su), 3.5, CHIN, "#ffffff", 1.6),
                    Text(x(value) + 5, y(su) + 12, f"{name} {value:.0f} kN{extra}", 8, "start", CHIN))
        else:
            fig.add(Line(x(value), plot[1], x(value), plot[3], CHIN, 1.0, (1.5, 2)),
                    Text(x(value) - 3, plot[1] + 10, f"{name} {value:.0f} kN{extra}", 8, "end", CHIN))
        entries.append((CHIN, f"{name} {value:.0f} kN{extra}", None, "dot"))

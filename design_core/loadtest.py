"""Tests after installation: static load test interpretation and integrity ratings.

Units: loads in kN, settlements in mm (as the trade records them), times in minutes from the
start of the test, lengths in m, area in m2, Young's modulus in MPa, D in m.

Static load test (ASTM D1143 / EN ISO 22477-1 maintained load), on the virgin curve (the end
of each hold, keeping only loads above every load before them, so unload-reload cycles drop out):

* **Davisson** (1972) offset limit, in Fellenius (2001) "What capacity value to choose from the
  results of a static loading test", Deep Foundations Institute, Fulcrum: the load where the
  curve meets s = Q L / (A E) + 3.8 mm + D / 120 (D in mm), by linear interpolation between
  readings; None when the curve never reaches the line (the test did not fail by this rule).
* **Chin-Kondner** (Kondner 1963; Chin 1970): a straight line fitted to s/Q against s,
  s/Q = C1 s + C2, Q_u = 1 / C1.
* **Brinch Hansen 80 %** (1963): sqrt(s)/Q = C1 s + C2, Q_u = 1 / (2 sqrt(C1 C2)) at
  s_u = C2 / C1 (from memory, as quoted by Fellenius).
* **De Beer** (1968): log Q against log s falls on two straight lines; the yield load is their
  intersection (the split chosen by least squares).

The three fitted lines use least squares over the points above ``load_test_fit_from_fraction``
of the highest load (De Beer: all points) and give no answer when r^2 is below
``load_test_fit_r2_min``, when the line has the wrong sign, or with fewer than 3 points (4 for
De Beer). A value above the highest load applied is an extrapolation and is flagged as such: a
test to a proof load that never reaches the Davisson line reports the proof load met and its
settlement, and never calls an extrapolation a capacity.

Integrity (ASTM D5882 low strain, D6760 crosshole sonic logging, D7949 thermal): a rating
sound / anomaly / defect per pile; for crosshole sonic logging per tube pair from the
first-arrival-time increase (%) and the energy reduction (dB) against the rules' bands
(``csl_*``; bands as used in ASTM D6760 practice, from memory).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field
from typing import Any, Sequence

import numpy as np

from design_core.checks import Check
from design_core.cpt import _readings
from design_core.rules import Rules
from design_core.validate import number

CODES = ("load_test", "integrity")
INTEGRITY_RATINGS = ("sound", "anomaly", "defect")
LOAD_RANGE_KN = (0.0, 1e6)
SETTLEMENT_RANGE_MM = (-50.0, 2000.0)
TIME_RANGE_MIN = (0.0, 1e6)


def _series(name: str, values: Any, n: int | None, lo: float, hi: float) -> np.ndarray:
    """A read-only 1-D float array of finite values in [lo, hi]; ValueError naming it."""
    return _readings(name, values, n, lo, hi, ref="load_kn")


# --------------------------------------------------------------------------------------------
# The record
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class LoadTestRecord:
    """One static load test as read: a row per reading.

    ``load_kn`` (kN, 0-1e6) and ``settlement_mm`` (mm, -50 to 2000, positive down) at each
    reading; optional ``time_min`` (minutes from the start, not decreasing), ``hold`` (the stage
    number each reading belongs to: readings of one hold are consecutive) and ``cycle`` (1, 2,
    ... for the loading cycles). Without ``hold`` consecutive readings at one load form a hold.
    """

    load_kn: Any
    settlement_mm: Any
    time_min: Any = None
    hold: Any = None
    cycle: Any = None

    def __post_init__(self):
        set_ = object.__setattr__
        load = _series("load_kn", self.load_kn, None, *LOAD_RANGE_KN)
        if load.size < 2:
            raise ValueError("load_kn must hold at least 2 readings")
        set_(self, "load_kn", load)
        set_(self, "settlement_mm", _series("settlement_mm", self.settlement_mm, load.size,
                                            *SETTLEMENT_RANGE_MM))
        if self.time_min is not None:
            t = _series("time_min", self.time_min, load.size, *TIME_RANGE_MIN)
            if np.any(np.diff(t) < 0.0):
                k = int(np.flatnonzero(np.diff(t) < 0.0)[0]) + 1
                raise ValueError(f"time_min must not decrease: time_min[{k}] ({t[k]:g}) is before "
                                 f"time_min[{k - 1}] ({t[k - 1]:g})")
            set_(self, "time_min", t)
        for name in ("hold", "cycle"):
            value = getattr(self, name)
            if value is None:
                continue
            arr = _series(name, value, load.size, 0.0 if name == "hold" else 1.0, 1e6)
            if np.any(arr != np.round(arr)):
                raise ValueError(f"{name} must be whole numbers")
            set_(self, name, arr.astype(int))
        if self.hold is not None:
            starts = np.flatnonzero(np.diff(self.hold) != 0) + 1
            ids = self.hold[np.concatenate([[0], starts])]
            if len(set(ids.tolist())) != ids.size:
                raise ValueError("hold: the readings of each hold must be consecutive")

    def stages(self) -> list[np.ndarray]:
        """Row indices of each hold, in order (without ``hold``: runs of one load)."""
        marks = self.load_kn if self.hold is None else self.hold
        starts = np.concatenate([[0], np.flatnonzero(np.diff(marks) != 0) + 1, [marks.size]])
        return [np.arange(a, b) for a, b in zip(starts[:-1], starts[1:], strict=True)]

    def virgin_curve(self) -> tuple[np.ndarray, np.ndarray]:
        """(load kN, settlement mm) at the end of each hold, keeping loads above all before them.

        The first loading and each later load beyond the highest before: unload-reload cycles
        drop out. Starts at (0, 0) when the first load is above 0.
        """
        ends = np.array([rows[-1] for rows in self.stages()])
        q, s = self.load_kn[ends], self.settlement_mm[ends]
        keep = q > np.concatenate([[-np.inf], np.maximum.accumulate(q)[:-1]])
        q, s = q[keep], s[keep]
        if q[0] > 0.0:
            q, s = np.concatenate([[0.0], q]), np.concatenate([[0.0], s])
        return q, s


# --------------------------------------------------------------------------------------------
# Davisson
# --------------------------------------------------------------------------------------------

def davisson_line(load_kn: Any, length_m: float, area_m2: float, e_mpa: float,
                  diameter_m: float, rules: Rules | None = None) -> np.ndarray:
    """The Davisson offset line s = Q L / (A E) + 3.8 mm + D / 120 (mm), D in mm.

    Q in kN, L in m, A in m2, E in MPa: Q L / (A E) is then in mm. Offset and divisor from the
    rules (``load_test_davisson_offset_mm``, ``load_test_davisson_diameter_divisor``).
    """
    rules = rules or Rules()
    length = number("length_m", length_m, 0.5, 200.0)
    area = number("area_m2", area_m2, 1e-4, 30.0)
    e = number("e_mpa", e_mpa, 1_000.0, 250_000.0)
    d = number("diameter_m", diameter_m, 0.05, 5.0)
    q = np.asarray(load_kn, dtype=float)
    return (q * length / (area * e) + rules.load_test_davisson_offset_mm
            + d * 1000.0 / rules.load_test_davisson_diameter_divisor)


def davisson(load_kn: Any, settlement_mm: Any, length_m: float, area_m2: float, e_mpa: float,
             diameter_m: float, rules: Rules | None = None) -> float | None:
    """Davisson (1972) offset limit load (kN), or None when the curve never reaches the line.

    load_kn, settlement_mm: the load-settlement curve in loading order (kN, mm; use
    ``LoadTestRecord.virgin_curve`` for a test with holds and cycles); length_m L (m),
    area_m2 A (m2), e_mpa E of the pile (MPa), diameter_m D (m). The first reading where the
    settlement reaches the line s = Q L/(A E) + 3.8 + D/120 (mm) and the reading before it
    are joined by a straight line; its meeting point with the offset line is the limit. The
    curve starts from (0, 0) when its first load is above 0.
    """
    q = _series("load_kn", load_kn, None, *LOAD_RANGE_KN)
    s = _series("settlement_mm", settlement_mm, q.size, *SETTLEMENT_RANGE_MM)
    if q[0] > 0.0:
        q, s = np.concatenate([[0.0], q]), np.concatenate([[0.0], s])
    g = s - davisson_line(q, length_m, area_m2, e_mpa, diameter_m, rules)
    hits = np.flatnonzero(g >= 0.0)
    if hits.size == 0:
        return None
    k = int(hits[0])
    if k == 0:
        return float(q[0])
    t = g[k - 1] / (g[k - 1] - g[k])  # g goes from negative to >= 0
    return float(q[k - 1] + t * (q[k] - q[k - 1]))


# --------------------------------------------------------------------------------------------
# Fitted lines: Chin-Kondner, Brinch Hansen, De Beer
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class FitResult:
    """One interpretation by a fitted line.

    ``value_kn`` the load it gives (None when there is no answer, ``reason`` says why); ``r2``
    the fit quality (None when no line could be fitted); ``slope``/``intercept`` of the line in
    the method's axes; ``points_used`` the indices (into the curve given) of the points fitted;
    ``from_load_kn``/``to_load_kn`` the fit range; ``extrapolated`` True when the value is above
    the highest load applied; ``settlement_mm`` the settlement at the value where the method
    gives one (Brinch Hansen's s_u).
    """

    method: str
    value_kn: float | None
    r2: float | None
    slope: float | None
    intercept: float | None
    points_used: tuple[int, ...]
    from_load_kn: float | None
    to_load_kn: float | None
    extrapolated: bool
    reason: str
    settlement_mm: float | None = None

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        out = asdict(self)
        out["points_used"] = list(self.points_used)
        return out


def _line(x: np.ndarray, y: np.ndarray) -> tuple[float, float, float]:
    """Least-squares line y = slope x + intercept and its r^2 (1 for a perfect fit)."""
    xm, ym = x.mean(), y.mean()
    sxx = float(((x - xm) ** 2).sum())
    slope = float(((x - xm) * (y - ym)).sum() / sxx)
    intercept = float(ym - slope * xm)
    ss_res = float(((y - slope * x - intercept) ** 2).sum())
    ss_tot = float(((y - ym) ** 2).sum())
    scale = max(float((y ** 2).sum()), 1e-300)
    if ss_tot <= 1e-24 * scale:
        r2 = 1.0 if ss_res <= 1e-24 * scale else 0.0
    else:
        r2 = 1.0 - ss_res / ss_tot
    return slope, intercept, r2


def _fit_points(load_kn: Any, settlement_mm: Any, from_fraction: float | None,
                rules: Rules) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(indices, Q, s) of the points with Q > 0 and s > 0 at or above the fraction of Q_max."""
    q = _series("load_kn", load_kn, None, *LOAD_RANGE_KN)
    s = _series("settlement_mm", settlement_mm, q.size, *SETTLEMENT_RANGE_MM)
    frac = rules.load_test_fit_from_fraction if from_fraction is None else number(
        "from_fraction", from_fraction, 0.0, 0.95)
    idx = np.flatnonzero((q > 0.0) & (s > 0.0) & (q >= frac * q.max()))
    return idx, q[idx], s[idx]


def _no_answer(method: str, why: str, idx=(), q=None, r2=None, slope=None, intercept=None):
    """A FitResult with no value and the reason."""
    rng = (float(q.min()), float(q.max())) if q is not None and q.size else (None, None)
    return FitResult(method, None, r2, slope, intercept, tuple(int(i) for i in idx), rng[0],
                     rng[1], False, why)


def chin_fit(load_kn: Any, settlement_mm: Any, rules: Rules | None = None, *,
             from_fraction: float | None = None) -> FitResult:
    """Chin-Kondner: s/Q = C1 s + C2 by least squares, Q_u = 1 / C1 (kN); see module docstring.

    Fitted to the points with Q > 0, s > 0 and Q at least ``from_fraction`` (default the rules'
    ``load_test_fit_from_fraction``) of the highest load. No answer (``value_kn`` None, the
    reason given) with fewer than 3 points, C1 <= 0 or r^2 below ``load_test_fit_r2_min``.
    """
    rules = rules or Rules()
    idx, q, s = _fit_points(load_kn, settlement_mm, from_fraction, rules)
    if idx.size < 3 or np.ptp(s) <= 0.0:
        return _no_answer("chin", f"{idx.size} usable points: at least 3 at different "
                          "settlements are needed", idx, q)
    c1, c2, r2 = _line(s, s / q)
    if c1 <= 0.0:
        return _no_answer("chin", "s/Q does not rise with s: no hyperbola", idx, q, r2, c1, c2)
    if r2 < rules.load_test_fit_r2_min:
        return _no_answer("chin", f"r2 {r2:.3f} is below {rules.load_test_fit_r2_min:g}: "
                          "the points do not lie on a line", idx, q, r2, c1, c2)
    qu = 1.0 / c1
    extrap = qu > q.max()
    how = "extrapolated beyond the highest load applied" if extrap else "within the loads applied"
    return FitResult("chin", qu, r2, c1, c2, tuple(int(i) for i in idx), float(q.min()),
                     float(q.max()), bool(extrap),
                     f"Chin-Kondner Q_u = 1/C1 = {qu:.0f} kN (r2 {r2:.3f}, {idx.size} points "
                     f"from {q.min():.0f} to {q.max():.0f} kN), {how}.")


def chin_kondner(load_kn: Any, settlement_mm: Any, rules: Rules | None = None, *,
                 from_fraction: float | None = None) -> tuple[float | None, float | None]:
    """Chin-Kondner ultimate load: (Q_u in kN, r^2) from s/Q = C1 s + C2 (Chin 1970).

    Returns ``(None, r2)`` when the fit is poor (r^2 below the rules' ``load_test_fit_r2_min``)
    or C1 <= 0, and ``(None, None)`` when fewer than 3 points could be fitted. The points used
    and the reason are in ``chin_fit``, which this wraps.
    """
    fit = chin_fit(load_kn, settlement_mm, rules, from_fraction=from_fraction)
    return fit.value_kn, fit.r2


def brinch_hansen(load_kn: Any, settlement_mm: Any, rules: Rules | None = None, *,
                  from_fraction: float | None = None) -> FitResult:
    """Brinch Hansen 80 %: sqrt(s)/Q = C1 s + C2, Q_u = 1/(2 sqrt(C1 C2)) kN at s_u = C2/C1 mm.

    Same points and rules as ``chin_fit``; no answer unless C1 > 0 and C2 > 0 and the fit is
    good enough. s in mm, Q in kN.
    """
    rules = rules or Rules()
    idx, q, s = _fit_points(load_kn, settlement_mm, from_fraction, rules)
    if idx.size < 3 or np.ptp(s) <= 0.0:
        return _no_answer("brinch_hansen", f"{idx.size} usable points: at least 3 at different "
                          "settlements are needed", idx, q)
    c1, c2, r2 = _line(s, np.sqrt(s) / q)
    if c1 <= 0.0 or c2 <= 0.0:
        return _no_answer("brinch_hansen", "the line sqrt(s)/Q against s needs a positive "
                          "slope and intercept", idx, q, r2, c1, c2)
    if r2 < rules.load_test_fit_r2_min:
        return _no_answer("brinch_hansen", f"r2 {r2:.3f} is below {rules.load_test_fit_r2_min:g}",
                          idx, q, r2, c1, c2)
    qu = 1.0 / (2.0 * math.sqrt(c1 * c2))
    su = c2 / c1
    extrap = qu > q.max()
    how = "extrapolated beyond the highest load applied" if extrap else "within the loads applied"
    return FitResult("brinch_hansen", qu, r2, c1, c2, tuple(int(i) for i in idx), float(q.min()),
                     float(q.max()), bool(extrap),
                     f"Brinch Hansen 80 % Q_u = {qu:.0f} kN at s_u {su:.1f} mm (r2 {r2:.3f}), "
                     f"{how}.", su)


def de_beer(load_kn: Any, settlement_mm: Any, rules: Rules | None = None) -> FitResult:
    """De Beer yield load (kN): log Q against log s on two straight lines, their intersection.

    Every split of the points with Q > 0 and s > 0 (at least 2 points each side) is tried and
    the one with the least total squared error kept; ``slope``/``intercept`` are the second
    line's, r^2 of both lines together. No answer with fewer than 4 points, when the lines are
    parallel, when they meet outside the settlements measured, or when r^2 is below the rules'.
    """
    rules = rules or Rules()
    idx, q, s = _fit_points(load_kn, settlement_mm, 0.0, rules)
    if idx.size < 4:
        return _no_answer("de_beer", f"{idx.size} usable points: at least 4 are needed", idx, q)
    x, y = np.log10(s), np.log10(q)
    best = None
    for k in range(2, x.size - 1):
        if np.ptp(x[:k]) <= 0.0 or np.ptp(x[k:]) <= 0.0:
            continue
        m1, b1, _ = _line(x[:k], y[:k])
        m2, b2, _ = _line(x[k:], y[k:])
        sse = float(((y[:k] - m1 * x[:k] - b1) ** 2).sum() + ((y[k:] - m2 * x[k:] - b2) ** 2).sum())
        if best is None or sse < best[0]:
            best = (sse, k, m1, b1, m2, b2)
    if best is None:
        return _no_answer("de_beer", "no two lines could be fitted", idx, q)
    sse, k, m1, b1, m2, b2 = best
    ss_tot = float(((y - y.mean()) ** 2).sum())
    r2 = 1.0 - sse / ss_tot if ss_tot > 0.0 else 0.0
    if abs(m1 - m2) < 1e-12:
        return _no_answer("de_beer", "the two lines are parallel", idx, q, r2, m2, b2)
    xi = (b2 - b1) / (m1 - m2)
    if not x[0] <= xi <= x[-1]:
        return _no_answer("de_beer", "the two lines meet outside the settlements measured", idx,
                          q, r2, m2, b2)
    if r2 < rules.load_test_fit_r2_min:
        return _no_answer("de_beer", f"r2 {r2:.3f} is below {rules.load_test_fit_r2_min:g}",
                          idx, q, r2, m2, b2)
    qy = float(10.0 ** (m1 * xi + b1))
    return FitResult("de_beer", qy, r2, m2, b2, tuple(int(i) for i in idx), float(q.min()),
                     float(q.max()), False,
                     f"De Beer yield {qy:.0f} kN where the lines through points 1-{k} and "
                     f"{k + 1}-{idx.size} meet (s {10 ** xi:.1f} mm, r2 {r2:.3f}).",
                     float(10.0 ** xi))


# --------------------------------------------------------------------------------------------
# Creep per hold
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class HoldCreep:
    """Settlement during one hold: ``creep_mm`` from its first to its last reading over
    ``duration_min``; ``k_s`` = (s2 - s1) / log10(t2 / t1) (mm per log cycle, times from the
    hold's start, the first reading after it); ``end_rate_mm_per_h`` between the last two
    readings; ``settled`` whether that rate is within the rules' ``load_test_creep_rate_mm_per_h``."""

    hold: int
    load_kn: float
    duration_min: float
    creep_mm: float
    k_s: float | None
    end_rate_mm_per_h: float | None
    settled: bool | None

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


def creep_per_hold(record: LoadTestRecord, rules: Rules | None = None) -> tuple[HoldCreep, ...]:
    """Creep of every hold with a time per reading (empty when the record has no times)."""
    rules = rules or Rules()
    if record.time_min is None:
        return ()
    out = []
    for number_, rows in enumerate(record.stages()):
        t, s = record.time_min[rows], record.settlement_mm[rows]
        hold = int(record.hold[rows[0]]) if record.hold is not None else number_
        duration = float(t[-1] - t[0])
        k_s = rate = settled = None
        if rows.size >= 3 and t[1] > t[0] and t[-1] > t[1]:
            k_s = float((s[-1] - s[1]) / math.log10((t[-1] - t[0]) / (t[1] - t[0])))
        if rows.size >= 2 and t[-1] > t[-2]:
            rate = float((s[-1] - s[-2]) / (t[-1] - t[-2]) * 60.0)
            settled = rate <= rules.load_test_creep_rate_mm_per_h
        out.append(HoldCreep(hold, float(record.load_kn[rows[-1]]), duration,
                             float(s[-1] - s[0]), k_s, rate, settled))
    return tuple(out)


# --------------------------------------------------------------------------------------------
# The whole test
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class LoadTestResult:
    """Every interpretation of one static load test.

    ``max_load_kn`` and ``settlement_at_max_mm`` at the end of the highest hold;
    ``davisson_kn`` the measured capacity by Davisson's limit (None: not reached, the test was a
    proof test by that rule); ``chin``/``brinch_hansen``/``de_beer`` the fitted lines;
    ``creep`` per hold; ``curve_load_kn``/``curve_settlement_mm`` the virgin curve interpreted
    (the points each fit used index into it); ``reason`` one line.
    """

    max_load_kn: float
    settlement_at_max_mm: float
    davisson_kn: float | None
    chin: FitResult
    brinch_hansen: FitResult
    de_beer: FitResult
    creep: tuple[HoldCreep, ...]
    curve_load_kn: tuple[float, ...]
    curve_settlement_mm: tuple[float, ...]
    reason: str
    elastic_mm_per_kn: float = field(default=0.0)

    @property
    def proof_only(self) -> bool:
        """True when the curve never reached the Davisson line: no measured capacity."""
        return self.davisson_kn is None

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict with every fit as a dict."""
        return {
            "max_load_kn": self.max_load_kn, "settlement_at_max_mm": self.settlement_at_max_mm,
            "davisson_kn": self.davisson_kn, "proof_only": self.proof_only,
            "chin": self.chin.to_dict(), "brinch_hansen": self.brinch_hansen.to_dict(),
            "de_beer": self.de_beer.to_dict(), "creep": [c.to_dict() for c in self.creep],
            "curve_load_kn": list(self.curve_load_kn),
            "curve_settlement_mm": list(self.curve_settlement_mm),
            "elastic_mm_per_kn": self.elastic_mm_per_kn, "reason": self.reason,
        }


def interpret_load_test(record: LoadTestRecord, length_m: float, area_m2: float, e_mpa: float,
                        diameter_m: float, rules: Rules | None = None) -> LoadTestResult:
    """Davisson, Chin-Kondner, Brinch Hansen, De Beer and creep for one test (module docstring).

    length_m: the pile's length from the loaded head to the toe (m); area_m2: its section (m2);
    e_mpa: its Young's modulus (MPa); diameter_m: D (m).
    """
    rules = rules or Rules()
    if not isinstance(record, LoadTestRecord):
        raise ValueError(f"record must be a LoadTestRecord, got {type(record).__name__}")
    q, s = record.virgin_curve()
    dav = davisson(q, s, length_m, area_m2, e_mpa, diameter_m, rules)
    chin = chin_fit(q, s, rules)
    hansen = brinch_hansen(q, s, rules)
    beer = de_beer(q, s, rules)
    qmax, smax = float(q[-1]), float(s[-1])
    if dav is None:
        reason = (f"Proof load {qmax:.0f} kN met at {smax:.1f} mm without reaching the Davisson "
                  "line: no capacity measured (any fitted value is an extrapolation).")
    else:
        reason = f"Davisson limit {dav:.0f} kN reached (highest load {qmax:.0f} kN at {smax:.1f} mm)."
    elastic = float(length_m) / (float(area_m2) * float(e_mpa))
    return LoadTestResult(qmax, smax, dav, chin, hansen, beer, creep_per_hold(record, rules),
                          tuple(float(x) for x in q), tuple(float(x) for x in s), reason, elastic)


def load_test_check(result: LoadTestResult, required_kn: float,
                    settlement_limit_mm: float | None = None) -> Check:
    """Check ``load_test``: the measured capacity (or the proof load met) against ``required_kn``.

    required_kn: what the test must show (kN): the required ultimate of the recheck, or the
    specified proof load. With a Davisson limit: ok when it is at least ``required_kn``. Without
    (a proof test): ok when the proof load met is at least ``required_kn`` (a lower bound, said
    so); not checked when the test stopped below it without failing (it proves nothing either
    way). settlement_limit_mm: the specification's limit at the highest load; exceeded is short.
    The ratio measured / required is in the reason; utilisation is required / measured.
    """
    required = number("required_kn", required_kn, 0.0, 1e6)
    limit_s = number("settlement_limit_mm", settlement_limit_mm, 0.0, 2000.0, optional=True)
    if limit_s is not None and result.settlement_at_max_mm > limit_s:
        return Check("load_test", result.settlement_at_max_mm, limit_s, "mm",
                     result.settlement_at_max_mm / limit_s if limit_s > 0 else math.inf, False,
                     f"Settlement {result.settlement_at_max_mm:.1f} mm at {result.max_load_kn:.0f} kN "
                     f"is over the {limit_s:g} mm allowed.")
    if result.davisson_kn is not None:
        value = result.davisson_kn
        util = required / value if value > 0 else math.inf
        ratio = value / required if required > 0 else math.inf
        return Check("load_test", value, required, "kN", util, value >= required,
                     f"Davisson limit {value:.0f} kN against {required:.0f} kN required "
                     f"(measured / required {ratio:.2f}).")
    value = result.max_load_kn
    if value >= required:
        return Check("load_test", value, required, "kN", required / value if value > 0 else 0.0,
                     True, f"Proof load {value:.0f} kN met at {result.settlement_at_max_mm:.1f} mm "
                     f"without failure, {required:.0f} kN required: capacity not measured, at "
                     f"least {value:.0f} kN.")
    return Check("load_test", value, required, "kN", None, None,
                 f"Test stopped at {value:.0f} kN without failure, below the {required:.0f} kN "
                 "required: it neither proves nor disproves the pile.")


# --------------------------------------------------------------------------------------------
# Integrity
# --------------------------------------------------------------------------------------------

def csl_rating(fat_increase_pct: float, energy_reduction_db: float,
               rules: Rules | None = None) -> str:
    """Rating of one crosshole sonic logging zone: "sound", "anomaly" or "defect".

    defect: first-arrival-time increase above ``csl_fat_defect_pct`` (30 %) or energy reduction
    above ``csl_energy_defect_db`` (12 dB); sound: increase at most ``csl_fat_anomaly_pct``
    (10 %) and reduction below ``csl_energy_anomaly_db`` (6 dB); anomaly otherwise (the
    questionable and flaw bands together). Bands as used in ASTM D6760 practice, from memory.
    """
    rules = rules or Rules()
    fat = number("fat_increase_pct", fat_increase_pct, -100.0, 1000.0)
    db = number("energy_reduction_db", energy_reduction_db, -60.0, 200.0)
    if fat > rules.csl_fat_defect_pct or db > rules.csl_energy_defect_db:
        return "defect"
    if fat <= rules.csl_fat_anomaly_pct and db < rules.csl_energy_anomaly_db:
        return "sound"
    return "anomaly"


@dataclass(frozen=True)
class CslZone:
    """One zone of one tube pair: ``pair`` (e.g. "1-3"), depths (m below the pile head), the
    first-arrival-time increase (%) and the energy reduction (dB) against the pile's sound
    concrete."""

    pair: str
    from_depth_m: float
    to_depth_m: float
    fat_increase_pct: float
    energy_reduction_db: float

    def __post_init__(self):
        if not isinstance(self.pair, str) or not 1 <= len(self.pair) <= 20:
            raise ValueError(f"pair must be 1-20 characters, got {self.pair!r}")
        number("from_depth_m", self.from_depth_m, 0.0, 200.0)
        number("to_depth_m", self.to_depth_m, 0.0, 200.0)
        if self.to_depth_m < self.from_depth_m:
            raise ValueError(f"to_depth_m ({self.to_depth_m:g}) must not be above from_depth_m "
                             f"({self.from_depth_m:g})")
        number("fat_increase_pct", self.fat_increase_pct, -100.0, 1000.0)
        number("energy_reduction_db", self.energy_reduction_db, -60.0, 200.0)

    def rating(self, rules: Rules | None = None) -> str:
        """sound / anomaly / defect by ``csl_rating``."""
        return csl_rating(self.fat_increase_pct, self.energy_reduction_db, rules)


def integrity_check(rating: str | None = None, csl: Sequence[CslZone] = (), *,
                    anomaly_depth_m: float | None = None, description: str = "",
                    rules: Rules | None = None) -> Check:
    """Check ``integrity``: ok when the pile is sound; short for an anomaly or a defect.

    rating: the tester's rating for the pile (one of INTEGRITY_RATINGS) or None; csl: the
    crosshole zones, each rated by the rules' bands. The worse of the two governs. Not checked
    when neither is given. value/limit: the worst first-arrival-time increase (%) against the
    anomaly band when zones are given.
    """
    rules = rules or Rules()
    if rating is not None and rating not in INTEGRITY_RATINGS:
        raise ValueError(f"rating must be one of {', '.join(INTEGRITY_RATINGS)}, got {rating!r}")
    depth = number("anomaly_depth_m", anomaly_depth_m, 0.0, 200.0, optional=True)
    zones = list(csl)
    if rating is None and not zones:
        return Check.not_checked("integrity", "", "no integrity result recorded")
    rank = {r: k for k, r in enumerate(INTEGRITY_RATINGS)}
    worst, why = rating or "sound", f"tester's rating {rating}" if rating else ""
    value = limit = util = None
    unit = ""
    if zones:
        rated = [(z.rating(rules), z) for z in zones]
        z_worst = max(rated, key=lambda rz: (rank[rz[0]], rz[1].fat_increase_pct))
        value = max(z.fat_increase_pct for z in zones)
        limit, unit = rules.csl_fat_anomaly_pct, "%"
        util = value / limit if limit > 0 else None
        if rank[z_worst[0]] >= rank[worst]:
            z = z_worst[1]
            worst = z_worst[0]
            why = (f"CSL pair {z.pair} {z.from_depth_m:g}-{z.to_depth_m:g} m: arrival +"
                   f"{z.fat_increase_pct:g} %, energy -{z.energy_reduction_db:g} dB")
    where = f" at {depth:g} m" if depth is not None and worst != "sound" else ""
    text = f" ({description})" if description and worst != "sound" else ""
    return Check("integrity", value, limit, unit, util, worst == "sound",
                 f"Integrity {worst}{where}{text}: {why}." if why else f"Integrity {worst}.")

// Toeline, At the rig: the tablet's offline estimate of the live checks (static/rig/live.js).
//
// When the server answers, the At the rig page shows the server's dry-run recheck
// (static/rig/preview.js). With no server this file works out an estimate from what the page
// holds: the pile's design values, the project's limits and the capacity curve cached with the
// project bundle (design resistance against toe level, for the design diameter and cut-off on
// the design ground). It is plain arithmetic on those numbers, written to give the same status,
// value and limit as design_core's recheck for each check it makes; tests/browser/
// test_offline_corpus.py runs this file in Chromium on generated cases against design_core.
//
// Where the copy on the tablet cannot tell, the answer is "not checked", never ok:
//   - axial_compression when strata were logged (the recheck uses the ground met), when the
//     as-built diameter or cut-off differs from the design (the curve is for the design ones),
//     when the toe lies between two curve points on either side of a layer boundary (the base
//     resistance jumps there), when the load basis is not known, or when the resistance is
//     within the interpolation band of the load (too close to call).
//   - any check whose input was not recorded.
// A toe above the design toe (more than toe_tolerance_mm) is short under toe_level, whatever
// the capacity curve says.
//
// No DOM here: offlineChecks(data, record) -> [{code, status, value, limit, unit, text}] and
// requiredToe(data) -> {level, demand, basis}; window.ToelineLive.

(function () {
  "use strict";

  // --- Numbers and formatting -----------------------------------------------------------------
  // A typed number: "12,5" and "12.5" both read 12.5 (as the server does); blank is null;
  // anything else is NaN so the live checks can say it is not a number.
  function parseNum(text) {
    if (text === null || text === undefined) return null;
    if (typeof text === "number") return Number.isFinite(text) ? text : NaN;
    const t = String(text).trim().replace("\u2212", "-");
    if (t === "") return null;
    if (t.indexOf(",") >= 0 && t.indexOf(".") >= 0) return NaN;
    if (!/^[+-]?(\d+([.,]\d*)?|[.,]\d+)([eE][+-]?\d+)?$/.test(t)) return NaN;
    const n = Number(t.replace(",", "."));
    return Number.isFinite(n) ? n : NaN;
  }
  const isNum = (x) => typeof x === "number" && Number.isFinite(x);
  function fixed(x, dp) { return isNum(x) ? x.toFixed(dp) : "–"; }
  function grouped(x) { return isNum(x) ? Math.round(x).toLocaleString("en-GB") : "–"; }
  function level(x) { return isNum(x) ? x.toFixed(2) + " m" : "–"; }

  const OK = "ok", SHORT = "short", NONE = "not checked";
  const LEVEL_TOL_M = 1e-6;
  const BOUNDARY_TOL_M = 0.001;
  // Linear interpolation between curve points 0.25 m apart misses the curvature of the
  // resistance with depth; a resistance this close to the load is not called offline.
  const BAND_FRACTION = 0.01;
  const BAND_MIN_KN = 1.0;

  function made(code, ok, value, limit, unit, text) {
    return { code: code, status: ok ? OK : SHORT, value: value, limit: limit, unit: unit, text: text };
  }
  // hint: the input is not typed yet, and the text is a hint rather than a finding.
  function notMade(code, unit, text, hint) {
    return { code: code, status: NONE, value: null, limit: null, unit: unit, text: text, hint: Boolean(hint) };
  }
  function numberIn(rec, key) {
    const v = rec[key];
    if (v === undefined || v === null || v === "") return null;
    return parseNum(v);
  }

  // --- The pile as built ------------------------------------------------------------------------
  function asBuilt(data, rec) {
    const d = data.design || {};
    const platform = numberIn(rec, "platform_level"), depth = numberIn(rec, "measured_depth");
    const toe = isNum(platform) && isNum(depth) ? platform - depth : null;
    const missing = [];
    if (platform === null) missing.push("platform_level");
    if (depth === null) missing.push("measured_depth");
    const cased = rec.permanent_casing !== undefined && rec.permanent_casing !== null
      ? Boolean(rec.permanent_casing) : Boolean(d.permanent_casing);
    return { d: d, toe: toe, platform: platform, missingToe: missing, cased: cased,
             exposure: rec.exposure_class || d.exposure_class, strata: rec.strata || [] };
  }

  function bad(code, unit, key) { return notMade(code, unit, key + " is not a number"); }

  // --- The load and the curve ---------------------------------------------------------------------
  // The load on the basis of the axial resistance, as design_core's compression check takes it:
  // working loads against a working-stress resistance, factored against a limit-state one.
  function axialDemand(data) {
    const load = data.design ? data.design.compression_kn : NaN;  // the schedule load: load_kn is already the demand
    const r = data.rules;
    if (!isNum(load)) return { demand: null, basis: "" };
    if (!r || !r.design_approach || !r.loads_are || !isNum(r.load_factor)) return { demand: null, basis: "" };
    if (r.design_approach === "working_stress") {
      return { demand: r.loads_are === "factored" ? load / r.load_factor : load, basis: "working" };
    }
    return { demand: r.loads_are === "working" ? load * r.load_factor : load, basis: "factored" };
  }

  function curvePoints(data) {
    const c = data.curve;
    if (!c || !c.toe_levels || !c.toe_levels.length) return null;
    return c.toe_levels.map((t, i) => [t, c.design[i]]).sort((a, b) => b[0] - a[0]);  // top down
  }

  function boundaries(data) {
    const out = [];
    (data.layers || []).forEach((l) => { if (isNum(l.bottom)) out.push(l.bottom); });
    return out;
  }

  // A layer boundary b between a lower point zLo and a higher point zHi, ends included, may make
  // the resistance jump inside the interval (the base changes layer at b, on one side or the
  // other of it): zLo <= b <= zHi.
  function jumpBetween(bounds, zLo, zHi) {
    return bounds.some((b) => b >= zLo - BOUNDARY_TOL_M && b <= zHi + BOUNDARY_TOL_M);
  }
  // A level this close to a boundary may fall on either side of it (which layer takes the base).
  function nearBoundary(bounds, z) { return bounds.some((b) => Math.abs(b - z) <= BOUNDARY_TOL_M); }

  // Design resistance at a toe level from the cached curve: {value} or {why} when it cannot tell.
  function resistanceAt(data, z) {
    const pts = curvePoints(data);
    if (!pts) return { why: data.curve_error || "no capacity curve on this tablet" };
    const bounds = boundaries(data);
    for (let i = 0; i < pts.length; i++) {
      if (Math.abs(pts[i][0] - z) <= LEVEL_TOL_M) {
        if (nearBoundary(bounds, z)) return { why: "the toe is at a layer boundary, where the base resistance jumps" };
        return { value: pts[i][1], exact: true };
      }
    }
    if (z > pts[0][0] || z < pts[pts.length - 1][0]) return { why: "the toe is outside the cached curve" };
    for (let i = 1; i < pts.length; i++) {
      const [zHi, dHi] = pts[i - 1], [zLo, dLo] = pts[i];
      if (z < zHi && z > zLo) {
        if (jumpBetween(bounds, zLo, zHi)) {
          return { why: "the toe is at a layer boundary, where the base resistance jumps" };
        }
        return { value: dHi + (dLo - dHi) * (zHi - z) / (zHi - zLo), exact: false };
      }
    }
    return { why: "the toe is outside the cached curve" };
  }

  function band(demand) { return Math.max(BAND_MIN_KN, BAND_FRACTION * demand); }

  // The level the load needs, on the design ground and geometry, erring deep: walking down the
  // curve, the first level where the resistance reaches the load plus the band (interpolated
  // between two points of one layer; across a layer boundary the deeper point), rounded down to
  // the centimetre; a level that would sit on a layer boundary is passed over for the next one
  // below; never above the server's own figure for the same pile. {level, demand, basis}.
  function requiredToe(data) {
    const { demand, basis } = axialDemand(data);
    const server = isNum(data.required_toe_level) ? data.required_toe_level : null;
    const pts = curvePoints(data);
    if (demand === null || !pts) return { level: server, demand: demand, basis: basis, fromServer: true };
    if (demand <= 0) return { level: null, demand: demand, basis: basis, none: true };
    const need = demand + band(demand);
    const bounds = boundaries(data);
    let found = null;
    for (let k = 0; k < pts.length && found === null; k++) {
      if (pts[k][1] < need) continue;
      let z = pts[k][0];
      if (k > 0 && pts[k - 1][1] < need && !jumpBetween(bounds, pts[k][0], pts[k - 1][0])) {
        const [zHi, dHi] = pts[k - 1], dLo = pts[k][1];
        z = zHi + (pts[k][0] - zHi) * (need - dHi) / (dLo - dHi);
      }
      const floored = Math.floor(z * 100 + 1e-6) / 100;
      if (nearBoundary(bounds, pts[k][0]) || jumpBetween(bounds, floored, z)) continue;
      found = floored;
    }
    if (found === null) return { level: null, demand: demand, basis: basis };
    if (server !== null && server < found) found = server;
    return { level: found, demand: demand, basis: basis };
  }

  // --- The checks --------------------------------------------------------------------------------
  function strataDiffer(data, ab) {
    // True when a logged stratum's material is not the ground model's at the middle of it.
    if (!isNum(ab.platform)) return true;
    return ab.strata.some((s) => {
      const from = parseNum(s.from_depth), to = parseNum(s.to_depth);
      if (!isNum(from) || !isNum(to)) return true;
      const mid = ab.platform - (from + to) / 2;
      const layer = (data.layers || []).find((l) => mid <= l.top && mid >= l.bottom);
      return !layer || layer.material !== s.material;
    });
  }

  function compression(data, rec, ab) {
    const code = "axial_compression", d = ab.d;
    const load = data.load_kn;
    if (isNum(load) && load <= 0) return made(code, true, 0, null, "kN", "no compression load in the design");
    if (ab.toe === null) return notMade(code, "kN", "as-built toe not recorded (" + ab.missingToe.join(", ") + ")");
    if (ab.strata.length) {
      return notMade(code, "kN", strataDiffer(data, ab)
        ? "the strata logged differ from the ground model: the level needed is from the design ground " +
          "and will be checked on the ground met when sent"
        : "strata logged: checked on the ground met when sent");
    }
    const dia = numberIn(rec, "diameter_mm"), cut = numberIn(rec, "cutoff_level");
    if (dia !== null && !(isNum(dia) && isNum(d.diameter_mm) && Math.abs(dia - d.diameter_mm) <= 0.5)) {
      return notMade(code, "kN", "the cached curve is for the design diameter; checked when sent");
    }
    if (cut !== null && !(isNum(cut) && isNum(d.cutoff_level) && Math.abs(cut - d.cutoff_level) <= 0.0005)) {
      return notMade(code, "kN", "the cached curve is for the design cut-off; checked when sent");
    }
    const top = Math.min(d.cutoff_level, isNum(data.ground_top) ? data.ground_top : d.cutoff_level);
    if (ab.toe >= top) return notMade(code, "kN", "the toe " + level(ab.toe) + " is not below the cut-off and the ground surface");
    if (isNum(data.ground_bottom) && ab.toe < data.ground_bottom - LEVEL_TOL_M) {
      return notMade(code, "kN", "the toe " + level(ab.toe) + " is below the bottom of the ground model");
    }
    const { demand, basis } = axialDemand(data);
    if (demand === null) return notMade(code, "kN", "the load basis is not in the copy on this tablet");
    const got = resistanceAt(data, ab.toe);
    if (!isNum(got.value)) return notMade(code, "kN", got.why);
    const margin = got.exact ? 0 : band(demand);
    const words = basis + " load " + grouped(demand) + " kN against about " + grouped(got.value) +
      " kN design resistance at this toe";
    if (Math.abs(got.value - demand) <= margin) {
      return notMade(code, "kN", words + ": too close to call from the cached curve");
    }
    return made(code, demand <= got.value, demand, got.value, "kN", words);
  }

  function toeLevel(data, rec, ab) {
    const code = "toe_level", d = ab.d;
    if (ab.toe === null) return notMade(code, "m", "as-built toe not recorded (" + ab.missingToe.join(", ") + ")");
    if (!isNum(d.toe_level)) return notMade(code, "m", "no design toe");
    const above = ab.toe - d.toe_level, lim = data.limits.toe_tolerance_mm / 1000;
    const where = Math.abs(above) < 0.005 ? "at the design toe " + level(d.toe_level)
      : fixed(Math.abs(above), 2) + " m " + (above > 0 ? "above" : "below") + " the design toe " + level(d.toe_level);
    return made(code, above <= lim + 1e-9, above, lim, "m", where);
  }

  function simple(code, rec, key, unit, fn) {
    const v = numberIn(rec, key);
    if (v === null) return null;
    if (Number.isNaN(v)) return bad(code, unit, key);
    return fn(v);
  }

  function diameter(data, rec, ab) {
    const code = "diameter";
    return simple(code, rec, "diameter_mm", "mm", (v) => {
      const least = ab.d.diameter_mm - data.limits.diameter_tolerance_mm;
      return made(code, v >= least - 1e-6, v, least, "mm", fixed(v, 0) + " mm against at least " + fixed(least, 0) + " mm");
    }) || notMade(code, "mm", "as-built diameter not recorded (diameter_mm)", true);
  }

  function debris(data, rec, ab) {
    const code = "base_debris", lim = data.limits.base_debris_mm;
    const v = numberIn(rec, "debris_mm");
    if (v === null && ab.d.pile_type && ab.d.pile_type !== "bored") {
      return made(code, true, null, lim, "mm", "a " + ab.d.pile_type + " pile has no open base to inspect");
    }
    return simple(code, rec, "debris_mm", "mm", (x) =>
      made(code, x <= lim + 1e-9, x, lim, "mm", fixed(x, 0) + " mm against at most " + fixed(lim, 0) + " mm"))
      || notMade(code, "mm", "base debris not recorded (debris_mm)", true);
  }

  function cover(data, rec, ab) {
    const code = "durability_cover";
    const table = ab.cased ? data.limits.min_cover_cased_mm : data.limits.min_cover_mm;
    const need = table ? table[ab.exposure] : undefined;
    return simple(code, rec, "cover_mm", "mm", (v) => {
      if (!isNum(need)) return notMade(code, "mm", "exposure class " + ab.exposure + " is not in the project's rules");
      return made(code, v >= need - 1e-9, v, need, "mm", fixed(v, 0) + " mm against at least " + fixed(need, 0) +
                  " mm for " + ab.exposure + (ab.cased ? " (in a permanent casing)" : " (cast against soil)"));
    }) || notMade(code, "mm", isNum(need) ? "at least " + fixed(need, 0) + " mm for " + ab.exposure : "", true);
  }

  function grade(data, rec, ab) {
    const code = "durability_grade";
    const need = data.limits.min_strength_mpa ? data.limits.min_strength_mpa[ab.exposure] : undefined;
    return simple(code, rec, "concrete_mpa", "MPa", (v) => {
      if (!isNum(need)) return notMade(code, "MPa", "exposure class " + ab.exposure + " is not in the project's rules");
      return made(code, v >= need - 1e-9, v, need, "MPa", fixed(v, 0) + " MPa against at least " + fixed(need, 0) +
                  " MPa for " + ab.exposure);
    }) || notMade(code, "MPa", "", true);
  }

  function position(data, rec, ab) {
    const code = "position", e = numberIn(rec, "easting"), n = numberIn(rec, "northing");
    if (Number.isNaN(e)) return bad(code, "mm", "easting");
    if (Number.isNaN(n)) return bad(code, "mm", "northing");
    if (e === null || n === null) return notMade(code, "mm", "", true);
    const dx = (e - ab.d.easting) * 1000, dy = (n - ab.d.northing) * 1000;
    const dev = Math.hypot(dx, dy), lim = data.limits.position_tolerance_mm;
    const sign = (x) => (x >= 0 ? "+" : "−") + fixed(Math.abs(x), 0);
    return made(code, dev <= lim + 1e-9, dev, lim, "mm", fixed(dev, 0) + " mm off design (east " + sign(dx) +
                ", north " + sign(dy) + " mm) against " + fixed(lim, 0) + " mm");
  }

  function inclination(data, rec) {
    const code = "inclination", lim = data.limits.inclination_tolerance;
    return simple(code, rec, "inclination", "m/m", (v) => made(code, v <= lim + 1e-12, v, lim, "m/m",
      (v > 0 ? "1 in " + fixed(1 / v, 0) : "vertical") + " against 1 in " + fixed(1 / lim, 0)))
      || notMade(code, "m/m", "limit 1 in " + fixed(1 / lim, 0), true);
  }

  function cutoff(data, rec, ab) {
    const code = "cutoff_level", lim = data.limits.cutoff_tolerance_mm;
    return simple(code, rec, "cutoff_level", "mm", (v) => {
      const off = (v - ab.d.cutoff_level) * 1000;
      return made(code, Math.abs(off) <= lim + 1e-6, off, lim, "mm", fixed(Math.abs(off), 0) + " mm " +
                  (off >= 0 ? "above" : "below") + " design, within ±" + fixed(lim, 0) + " mm allowed");
    }) || notMade(code, "mm", "", true);
  }

  function cage(data, rec, ab) {
    const code = "cage_length", d = ab.d;
    if (d.pile_type === "driven") return made(code, true, null, null, "m", "a driven pile has no cage placed on site");
    if (!d.cage_length || !d.n_bars) return made(code, true, null, null, "m", "no cage in the design");
    return simple(code, rec, "cage_length", "m", (v) => {
      const least = d.cage_length - data.limits.cage_tolerance_m;
      if (v >= least - 1e-9) return made(code, true, v, least, "m", fixed(v, 2) + " m against at least " + fixed(least, 2) + " m");
      const top = isNum(numberIn(rec, "cutoff_level")) ? numberIn(rec, "cutoff_level") : d.cutoff_level;
      return made(code, false, v, least, "m", fixed(least - v, 2) + " m short of " + fixed(least, 2) +
                  " m: no bars below " + level(top - v));
    }) || notMade(code, "m", "cage length not recorded (cage_length)", true);
  }

  function volume(data, rec, ab) {
    const code = "concrete_volume";
    const vol = numberIn(rec, "concrete_volume_m3");
    if (Number.isNaN(vol)) return bad(code, "", "concrete_volume_m3");
    if (vol === null) return notMade(code, "", "", true);
    const casting = numberIn(rec, "casting_level"), cut = numberIn(rec, "cutoff_level");
    const top = isNum(casting) ? casting : cut;
    const area = ab.d.area_m2;
    if (ab.toe === null || !isNum(top) || !isNum(area)) {
      return notMade(code, "", "type the platform level, depth and final concrete level (or cut-off) for the ratio", true);
    }
    const length = top - ab.toe;
    if (length <= 0) return notMade(code, "", "the concrete level is not above the toe");
    const theo = area * length, ratio = vol / theo;
    const lo = data.limits.volume_ratio_min, hi = data.limits.volume_ratio_max;
    return made(code, ratio >= lo - 1e-9 && ratio <= hi + 1e-9, ratio, ratio > hi ? hi : lo, "",
                "ratio " + fixed(ratio, 2) + " (" + fixed(vol, 2) + " m³ against " + fixed(theo, 2) +
                " m³ theoretical), within " + fixed(lo, 2) + " to " + fixed(hi, 2) + " wanted");
  }

  function minutesBetween(a, b) {
    if (!a || !b) return null;
    const ta = new Date(a).getTime(), tb = new Date(b).getTime();
    if (isNaN(ta) || isNaN(tb)) return null;
    return (tb - ta) / 60000;
  }

  function concreteTime(data, rec) {
    const code = "concrete_time", lim = data.limits.batch_to_discharge_min;
    const rows = rec.deliveries || [];
    if (!rows.length) return notMade(code, "min", "", true);
    const minutes = rows.map((r) => minutesBetween(r.batched_at, r.discharged_at));
    const known = minutes.filter((m) => m !== null);
    if (known.some((m) => m < 0)) return notMade(code, "min", "a delivery discharged before batching");
    const worst = known.length ? Math.max.apply(null, known) : null;
    if (worst !== null && worst > lim + 1e-9) {
      const k = minutes.indexOf(worst);
      return made(code, false, worst, lim, "min", (rows[k].docket || "truck " + (k + 1)) + " discharged " +
                  fixed(worst, 0) + " min after batching, more than " + fixed(lim, 0) + " min");
    }
    const untimed = minutes.length - known.length;
    if (untimed) return notMade(code, "min", untimed + " of " + minutes.length + " deliveries lack batching or discharge times");
    return made(code, true, worst, lim, "min", "longest " + fixed(worst, 0) + " min from batching, within " + fixed(lim, 0) + " min");
  }

  // Every check the tablet can estimate, in design_core's code names.
  function offlineChecks(data, rec) {
    rec = rec || {};
    const ab = asBuilt(data, rec);
    const toeBad = Number.isNaN(ab.toe) || Number.isNaN(numberIn(rec, "platform_level")) ||
                   Number.isNaN(numberIn(rec, "measured_depth"));
    const out = [
      toeBad ? bad("axial_compression", "kN", Number.isNaN(numberIn(rec, "platform_level")) ? "platform_level" : "measured_depth")
             : compression(data, rec, ab),
      toeBad ? bad("toe_level", "m", "measured_depth") : toeLevel(data, rec, ab),
      diameter(data, rec, ab), debris(data, rec, ab), cover(data, rec, ab), grade(data, rec, ab),
      position(data, rec, ab), inclination(data, rec), cutoff(data, rec, ab), cage(data, rec, ab),
      volume(data, rec, ab), concreteTime(data, rec),
    ];
    return out;
  }

  window.ToelineLive = {
    parseNum: parseNum, isNum: isNum, fixed: fixed, grouped: grouped, level: level,
    minutesBetween: minutesBetween, axialDemand: axialDemand, resistanceAt: resistanceAt,
    requiredToe: requiredToe, offlineChecks: offlineChecks,
  };
})();

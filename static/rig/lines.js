// Toeline, At the rig: the live lines beside the fields (static/rig/lines.js).
//
// Online, the figures typed so far are sent (debounced, PREVIEW_DELAY_MS after the last key) to
// the server's dry-run recheck, POST /api/v1/projects/<id>/piles/<mark>/preview with the body of
// the record PUT ({"record": {...}}); nothing is stored. Its answer ({verdict, checks,
// required_toe_level, more_needed_m}) fills every line with the server's words and numbers,
// labelled as the server's recheck. Until it answers, and whenever it cannot (no signal, the
// server down or refusing), the lines show the tablet's own estimate (static/rig/live.js),
// labelled as an estimate. Each line says OK / SHORT / NOT CHECKED in words, not colour alone.
//
// window.ToelineRigLines.start({data, record, csrf}) with functions giving the page's rig data,
// the record as typed and the CSRF token; then update() after every change.

(function () {
  "use strict";
  const L = window.ToelineLive;
  const PREVIEW_DELAY_MS = 400;
  const PREVIEW_TIMEOUT_MS = 15000;
  const byId = (id) => document.getElementById(id);

  // design_core's check codes and the line each is shown on (the toe line takes two).
  const LINE_OF = {
    axial_compression: "toe", toe_level: "toe", diameter: "diameter", base_debris: "debris",
    durability_cover: "cover", durability_grade: "grade", position: "position",
    inclination: "inclination", cutoff_level: "cutoff", cage_length: "cage",
    concrete_volume: "volume", concrete_time: "time",
  };
  const WORD = { ok: "OK: ", short: "SHORT: ", bad: "Check: ", none: "Not checked: " };
  const SOURCE = {
    server: "Server's recheck",
    pending: "Tablet estimate (asking the server)",
    offline: "Offline estimate",
  };

  let page = null;
  let timer = null;
  let asked = 0;          // the number of the newest preview asked for
  let inflight = null;    // its AbortController
  let lastServer = null;  // {seq, body} of the newest answer that matches the figures

  // --- Writing a line ----------------------------------------------------------------------------
  function say(id, state, message, source) {
    const el = byId("live-" + id);
    if (!el) return;
    el.className = "live " + (state || "");
    el.dataset.state = state || "";
    el.dataset.source = source || "";
    el.textContent = message ? (source ? SOURCE[source] + " · " : "") + message : "";
  }

  function hint(text) { return text ? text.charAt(0).toUpperCase() + text.slice(1) + "." : ""; }
  function stateOf(status) { return status === "ok" ? "ok" : status === "short" ? "short" : ""; }
  function word(status, text) {
    if (/ is not a number$/.test(text || "")) return WORD.bad + text;
    if (status === "ok") return WORD.ok + text;
    if (status === "short") return WORD.short + text;
    return text ? WORD.none + text : "";
  }
  function statusOf(check) {
    if (check.status) return check.status;
    return check.ok === true ? "ok" : check.ok === false ? "short" : "not checked";
  }

  function sourceLine(source, extra) {
    const el = byId("live-source");
    if (!el) return;
    el.dataset.source = source;
    byId("live-source-label").textContent = SOURCE[source] + (extra ? ": " + extra : "");
  }

  // --- The toe line: the level the load needs, the compression check and the design toe ----------
  // more: metres still to bore to the level the load needs; spare: metres below it (or null).
  function toeLine(axial, toe, more, spare, needFor, source) {
    let state = "";
    if ((axial && axial.status === "short") || (toe && toe.status === "short") || more > 0.005) state = "short";
    else if (axial && toe && axial.status === "ok" && toe.status === "ok") state = "ok";
    const parts = [];
    if (more > 0.005 && axial && axial.status !== "ok") {
      parts.push(L.fixed(more, 2) + " m more needed for " + L.grouped(needFor) + " kN");
    } else if (more <= 0.005 && spare !== null && axial && axial.status === "ok") {
      parts.push("reaches design with " + L.fixed(Math.max(spare, 0), 2) + " m to spare");
    }
    if (axial && axial.text) parts.push(axial.text);
    if (toe && toe.text) parts.push(toe.text);
    if (!parts.length) return say("toe", "", "", "");
    const lead = state === "short" ? WORD.short : state === "ok" ? WORD.ok : WORD.none;
    if (/ is not a number$/.test(parts[0])) return say("toe", "bad", WORD.bad + parts[0], source);
    say("toe", state, lead + parts.join("; "), source);
  }

  function toePanel(toe, required, needFor, here) {
    byId("toe-level").textContent = L.isNum(toe) ? L.level(toe) : "–";
    byId("required-toe").textContent = L.isNum(required) ? L.level(required) + " for " + L.grouped(needFor) + " kN"
      : (page.data().curve ? "not reached in the ground model" : (page.data().curve_error || "–"));
    byId("capacity-here").textContent = L.isNum(here) ? L.grouped(here) + " kN" : "–";
  }

  // --- The tablet's estimate -------------------------------------------------------------------
  function showEstimate(source) {
    const data = page.data(), rec = page.record();
    const results = L.offlineChecks(data, rec);
    const by = {};
    results.forEach((r) => { by[r.code] = r; });
    const platform = L.parseNum(rec.platform_level), depth = L.parseNum(rec.measured_depth);
    const toe = L.isNum(platform) && L.isNum(depth) ? platform - depth : null;
    const need = L.requiredToe(data);
    const needFor = L.isNum(need.demand) ? need.demand : data.load_kn;
    const more = L.isNum(toe) && L.isNum(need.level) ? toe - need.level : 0;
    const here = L.isNum(toe) ? L.resistanceAt(data, toe).value : null;
    toePanel(toe, need.level, needFor, here);
    if (toe === null && !Number.isNaN(platform) && !Number.isNaN(depth)) {
      say("toe", "", L.isNum(depth) ? "Type the platform level to get the toe." : "", "");
    } else {
      toeLine(by.axial_compression, by.toe_level, more, L.isNum(need.level) && L.isNum(toe) ? need.level - toe : null,
              needFor, source);
    }
    results.forEach((r) => {
      const id = LINE_OF[r.code];
      if (id === "toe") return;
      if (r.hint) return say(id, "", hint(r.text), "");
      const badText = / is not a number$/.test(r.text);
      say(id, badText ? "bad" : stateOf(r.status), word(r.status, r.text), r.status === "not checked" && !badText ? "" : source);
    });
  }

  // --- The server's recheck -----------------------------------------------------------------------
  function showServer(body) {
    const by = {};
    (body.checks || []).forEach((c) => { by[c.code] = c; });
    const rec = page.record();
    const platform = L.parseNum(rec.platform_level), depth = L.parseNum(rec.measured_depth);
    const toe = L.isNum(platform) && L.isNum(depth) ? platform - depth : null;
    const asLine = (c) => c ? { status: statusOf(c), text: c.reason, value: c.value, limit: c.limit } : null;
    const axial = asLine(by.axial_compression);
    const needFor = axial && L.isNum(axial.value) ? axial.value : page.data().load_kn;
    toePanel(toe, body.required_toe_level, needFor, axial ? axial.limit : null);
    const spare = L.isNum(body.required_toe_level) && L.isNum(toe) ? body.required_toe_level - toe : null;
    toeLine(axial, asLine(by.toe_level), L.isNum(body.more_needed_m) ? body.more_needed_m : 0, spare, needFor, "server");
    const hints = {};
    L.offlineChecks(page.data(), rec).forEach((r) => { if (r.hint) hints[r.code] = r.text; });
    Object.keys(LINE_OF).forEach((code) => {
      const id = LINE_OF[code];
      if (id === "toe") return;
      const c = by[code];
      if (!c) return say(id, "", "", "");
      const status = statusOf(c);
      if (status === "not checked" && code in hints) return say(id, "", hint(hints[code]), "");  // not typed yet
      say(id, stateOf(status), word(status, c.reason), "server");
    });
    const verdict = body.verdict ? "verdict if saved now: " + body.verdict : "";
    sourceLine("server", verdict);
  }

  // --- Asking the server ------------------------------------------------------------------------
  function previewUrl() {
    const d = page.data();
    if (d.urls && d.urls.preview) return d.urls.preview;
    return "/api/v1/projects/" + encodeURIComponent(d.project_id) + "/piles/" + encodeURIComponent(d.mark) + "/preview";
  }

  async function freshToken() {
    try {
      const r = await fetch("/api/v1/session", { credentials: "same-origin", cache: "no-store",
                                                 headers: { Accept: "application/json" } });
      const body = r.ok ? await r.json() : null;
      return body && body.csrf_token ? body.csrf_token : null;
    } catch (err) { return null; }
  }

  async function post(record, token, signal) {
    return fetch(previewUrl(), {
      method: "POST", credentials: "same-origin", signal: signal, cache: "no-store",
      headers: { "Content-Type": "application/json", Accept: "application/json", "X-CSRFToken": token },
      body: JSON.stringify({ record: record }),
    });
  }

  async function ask(seq) {
    if (inflight) inflight.abort();
    const controller = new AbortController();
    inflight = controller;
    const limit = setTimeout(() => controller.abort(), PREVIEW_TIMEOUT_MS);
    const record = page.record();
    try {
      let response = await post(record, page.csrf(), controller.signal);
      const type = response.headers.get("Content-Type") || "";
      if (response.status === 400 && !type.includes("json")) {     // an old CSRF token
        const token = await freshToken();
        if (token) response = await post(record, token, controller.signal);
      }
      if (seq !== asked) return;
      let body = null;
      try { body = await response.json(); } catch (err) { body = null; }
      if (response.ok && body && Array.isArray(body.checks)) {
        lastServer = { seq: seq, body: body };
        showServer(body);
      } else if (response.status === 422 && body && body.errors) {
        showEstimate("offline");
        sourceLine("offline", "the server cannot check these figures yet (" +
          Object.keys(body.errors).map((k) => k + ": " + body.errors[k]).join("; ") + ")");
      } else {
        showEstimate("offline");
        sourceLine("offline", "the server did not give its recheck (answer " + response.status + ")");
      }
    } catch (err) {
      if (seq !== asked) return;
      showEstimate("offline");
      sourceLine("offline", "no answer from the server; the recheck is made when the record is sent");
    } finally {
      clearTimeout(limit);
      if (inflight === controller) inflight = null;
    }
  }

  // --- After every change ----------------------------------------------------------------------
  function update() {
    if (!page) return;
    asked += 1;
    lastServer = null;
    clearTimeout(timer);
    const d = page.data();
    const online = navigator.onLine !== false && d.can_record !== false && window.fetch;
    if (!online) {
      if (inflight) inflight.abort();
      showEstimate("offline");
      sourceLine("offline", navigator.onLine === false
        ? "no signal; the recheck is made when the record is sent" : "the server's recheck is for those who record");
      return;
    }
    showEstimate("pending");
    sourceLine("pending");
    const seq = asked;
    timer = setTimeout(() => ask(seq), PREVIEW_DELAY_MS);
  }

  function start(hooks) {
    page = hooks;
    window.addEventListener("online", update);
    window.addEventListener("offline", update);
    update();
  }

  window.ToelineRigLines = { start: start, update: update, last: () => lastServer };
})();

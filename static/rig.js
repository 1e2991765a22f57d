// Toeline, At the rig: the one-page pile record (static/rig.js).
//
// The page embeds what the server worked out for this pile (the rig data) as JSON in
// <script type="application/json" id="rig-data">: design values, the newest record, the
// capacity curve (design resistance against toe level), the level the design load needs,
// and the limits of the project's rules. Every engineering method lives on the server
// (design_core), which rechecks the whole pile on every save and, as figures are typed, in a
// dry run whose answer the live lines show (static/rig/lines.js); with no server the lines
// show the tablet's estimate (static/rig/live.js, tested against design_core).
//
// Saves go through window.ToelineOutbox (static/outbox/: IndexedDB first, then the API)
// when it is there, else straight to the API. Offline, or on the cached page of another pile,
// the pile's data comes from the outbox's project bundle, and the project's rules (for the
// load basis of the estimate) from the bundle too.
//
// Sections: data, numbers and formatting, the form (fill and gather), live lines, repeating
// rows (strata, deliveries), saving, the result, start. Photos: static/rig/photos.js.

(function () {
  "use strict";

  // --- Data ------------------------------------------------------------------------------
  const dataEl = document.getElementById("rig-data");
  if (!dataEl) return;
  let data = JSON.parse(dataEl.textContent);
  const options = JSON.parse(document.getElementById("rig-options").textContent);
  const form = document.getElementById("rig-form");
  const byId = (id) => document.getElementById(id);

  // --- Numbers and formatting (static/rig/live.js) ----------------------------------------------
  const L = window.ToelineLive;
  const { parseNum, isNum, fixed, grouped } = L;

  // --- The form: fill from a record, gather into a record ------------------------------------
  function fieldInputs() {
    return Array.from(document.querySelectorAll("[data-path]")).filter((el) => !el.closest("tr"));
  }

  function toLocalInput(value) {
    if (!value) return "";
    const plain = /^(\d{4}-\d{2}-\d{2}T\d{2}:\d{2})(:\d{2}(\.\d+)?)?$/.exec(value);
    if (plain) return plain[1];
    const d = new Date(value);  // with a zone: show it in the tablet's local time
    if (isNaN(d.getTime())) return "";
    const pad = (n) => String(n).padStart(2, "0");
    return d.getFullYear() + "-" + pad(d.getMonth() + 1) + "-" + pad(d.getDate()) + "T" +
      pad(d.getHours()) + ":" + pad(d.getMinutes());
  }

  function setValue(el, value) {
    if (value === undefined || value === null) { el.value = ""; return; }
    if (el.dataset.kind === "time") el.value = toLocalInput(value);
    else el.value = String(value);
  }

  // Values the inspector confirms rather than measures start at the design value on a pile with
  // no record yet. Measured values (depth, debris, cover, position, inclination, cut-off) stay
  // blank: an unmeasured figure must never pass a check by default.
  const PREFILL_FROM_DESIGN = ["diameter_mm", "cage_length", "exposure_class", "concrete_mpa"];

  function fill() {
    const rec = data.record || {};
    fieldInputs().forEach((el) => setValue(el, rec[el.dataset.path]));
    if (!data.version && data.design) {
      PREFILL_FROM_DESIGN.forEach((key) => {
        const el = document.querySelector('[data-path="' + key + '"]');
        if (el && el.value === "" && data.design[key] !== null && data.design[key] !== undefined) {
          el.value = String(data.design[key]);
        }
      });
    }
    const progress = byId("f-progress");
    if (progress) progress.value = rec.progress && rec.progress !== "planned" ? rec.progress : "boring";
    document.querySelectorAll("[data-design]").forEach((el) => {
      const v = data.design ? data.design[el.dataset.design] : null;
      el.textContent = v === null || v === undefined ? "–" : String(v) + (el.dataset.unit ? " " + el.dataset.unit : "");
    });
    byId("strata-rows").textContent = "";
    (rec.strata || []).forEach(addStratum);
    byId("delivery-rows").textContent = "";
    (rec.deliveries || []).forEach(addDelivery);
    byId("version-now").textContent = data.version || 0;
    byId("progress-now").textContent = data.progress || "planned";
    if (data.result) showResult(data.result);
    live();
  }

  function valueOf(el) {
    if (el.dataset.kind === "number") {
      const n = parseNum(el.value);
      return n === null ? null : (Number.isNaN(n) ? el.value : n);  // the server names bad text
    }
    if (el.dataset.kind === "int") return el.value === "" ? null : Number(el.value);
    const v = el.value.trim();
    return v === "" ? null : v;
  }

  function gather() {
    const rec = {};
    fieldInputs().forEach((el) => {
      const v = valueOf(el);
      if (v !== null) rec[el.dataset.path] = v;
    });
    const strata = rows("strata-rows");
    if (strata.length) rec.strata = strata;
    const deliveries = rows("delivery-rows");
    if (deliveries.length) rec.deliveries = deliveries;
    return rec;
  }

  // Rows in which nothing was typed (only the drop-downs' defaults) are left out.
  // Each row sent is marked with its index in the list (data-sent), so the server's
  // "strata[1].to_depth" finds its row.
  function rows(bodyId) {
    let sent = 0;
    return Array.from(byId(bodyId).querySelectorAll("tr")).map((tr) => {
      const row = {};
      let typed = false;
      tr.querySelectorAll("[data-key]").forEach((el) => {
        const v = valueOf(el);
        if (v === null) return;
        row[el.dataset.key] = v;
        if (el.tagName !== "SELECT") typed = true;
      });
      tr.dataset.sent = typed ? String(sent++) : "";
      return typed ? row : null;
    }).filter((row) => row !== null);
  }

  // --- Live lines ------------------------------------------------------------------------------
  // static/rig/lines.js writes them: the server's dry-run recheck when it answers, else the
  // tablet's estimate (static/rig/live.js). Here only each delivery row's own minutes.
  const minutesBetween = L.minutesBetween;

  function liveDeliveries() {
    const lim = data.limits.batch_to_discharge_min;
    byId("delivery-rows").querySelectorAll("tr").forEach((tr) => {
      const out = tr.querySelector("output");
      const m = minutesBetween(tr.querySelector('[data-key="batched_at"]').value,
                               tr.querySelector('[data-key="discharged_at"]').value);
      if (m === null) { out.textContent = ""; out.className = "live"; return; }
      const ok = m >= 0 && m <= lim + 1e-9;
      out.className = "live " + (ok ? "ok" : "short");
      out.dataset.state = ok ? "ok" : "short";
      out.textContent = (ok ? "OK: " : "SHORT: ") + (m < 0 ? "discharged before batching" :
        fixed(m, 0) + " min (at most " + fixed(lim, 0) + ")");
    });
  }

  function live() {
    liveDeliveries();
    if (window.ToelineRigLines) window.ToelineRigLines.update();
  }

  // --- Repeating rows: strata met and concrete deliveries ---------------------------------------
  // Each field of a row carries its own visible label, so a row reads the same at any width.
  let rowFields = 0;
  function cell(tr, control, labelText, cls) {
    const td = document.createElement("td");
    td.className = cls || "";
    if (labelText) {
      const label = document.createElement("label");
      label.className = "row-label";
      label.textContent = labelText;
      control.id = "row-field-" + (++rowFields);
      label.htmlFor = control.id;
      td.append(label);
    }
    td.append(control);
    tr.append(td);
    return td;
  }
  function input(key, kind, value, labelText, attrs) {
    const el = document.createElement("input");
    el.dataset.key = key;
    el.dataset.kind = kind;
    el.setAttribute("aria-label", labelText);
    if (kind === "number") { el.type = "text"; el.inputMode = "decimal"; el.autocomplete = "off"; }
    else if (kind === "time") { el.type = "datetime-local"; el.step = "60"; }
    else el.type = "text";
    Object.entries(attrs || {}).forEach(([k, v]) => el.setAttribute(k, v));
    setValue(el, value);
    return el;
  }
  function select(key, choices, value, labelText, kind) {
    const el = document.createElement("select");
    el.dataset.key = key;
    el.dataset.kind = kind || "choice";
    el.setAttribute("aria-label", labelText);
    choices.forEach(([v, t]) => {
      const o = document.createElement("option");
      o.value = v; o.textContent = t;
      el.append(o);
    });
    el.value = value === undefined || value === null ? "" : String(value);
    return el;
  }
  function removeButton(tr, what) {
    const b = document.createElement("button");
    b.type = "button"; b.className = "btn small"; b.textContent = "Remove";
    b.setAttribute("aria-label", "Remove " + what);
    b.addEventListener("click", () => { tr.remove(); live(); });
    return b;
  }

  function addStratum(s) {
    s = s || {};
    const n = byId("strata-rows").children.length, name = "Stratum " + (n + 1);
    const tr = document.createElement("tr");
    tr.dataset.index = n;
    cell(tr, input("from_depth", "number", s.from_depth, name + " from depth (m)"), "From (m)", "f-num");
    cell(tr, input("to_depth", "number", s.to_depth, name + " to depth (m)"), "To (m)", "f-num");
    cell(tr, select("material", options.materials.map((m) => [m, m]), s.material || "cohesive", name + " material"),
         "Material", "f-choice");
    cell(tr, input("description", "text", s.description, name + " description", { maxlength: "500" }),
         "Description", "f-text");
    const layers = [["", "nearest"]].concat((data.layers || []).map((l) =>
      [String(l.index), l.index + ": " + l.material + " " + fixed(l.top, 1) + " to " + fixed(l.bottom, 1)]));
    cell(tr, select("layer_index", layers, s.layer_index, name + " ground-model layer", "int"), "Layer", "f-choice");
    cell(tr, removeButton(tr, name.toLowerCase()), "", "f-remove");
    byId("strata-rows").append(tr);
  }

  function addDelivery(d) {
    d = d || {};
    const n = byId("delivery-rows").children.length, name = "Delivery " + (n + 1);
    const tr = document.createElement("tr");
    cell(tr, input("docket", "text", d.docket, name + " docket", { maxlength: "50" }), "Docket", "f-text");
    cell(tr, input("volume_m3", "number", d.volume_m3, name + " volume (m3)"), "Volume (m³)", "f-num");
    cell(tr, input("batched_at", "time", d.batched_at, name + " batched at"), "Batched", "f-time");
    cell(tr, input("discharged_at", "time", d.discharged_at, name + " discharged at"), "Discharged", "f-time");
    cell(tr, input("slump_mm", "number", d.slump_mm, name + " slump (mm)"), "Slump (mm)", "f-num");
    const out = document.createElement("output");
    out.className = "live";
    out.setAttribute("aria-live", "polite");
    cell(tr, out, "From batching", "f-out");
    cell(tr, removeButton(tr, name.toLowerCase()), "", "f-remove");
    byId("delivery-rows").append(tr);
  }

  // --- Saving --------------------------------------------------------------------------------
  function csrf() {
    const m = document.querySelector('meta[name="csrf-token"]');
    return m ? m.content : "";
  }
  function newId() {
    if (window.ToelineOutbox && window.ToelineOutbox.newId) return window.ToelineOutbox.newId();
    if (window.crypto && crypto.randomUUID) return crypto.randomUUID();
    const b = crypto.getRandomValues(new Uint8Array(16));
    b[6] = (b[6] & 0x0f) | 0x40; b[8] = (b[8] & 0x3f) | 0x80;
    const h = Array.from(b, (x) => x.toString(16).padStart(2, "0")).join("");
    return h.slice(0, 8) + "-" + h.slice(8, 12) + "-" + h.slice(12, 16) + "-" + h.slice(16, 20) + "-" + h.slice(20);
  }
  function status(message, state) {
    const el = byId("save-status");
    if (!el) return;
    el.textContent = message;
    el.className = state || "";
  }

  function clearErrors() {
    document.querySelectorAll(".field-error").forEach((el) => { if (el.id !== "photo-error") el.textContent = ""; });
    document.querySelectorAll(".invalid").forEach((el) => el.classList.remove("invalid"));
  }

  // 422: put each message beside its field; "deliveries[1].batched_at" finds the row input.
  function showErrors(errors) {
    clearErrors();
    const rest = [];
    Object.entries(errors || {}).forEach(([key, message]) => {
      const m = /^(strata|deliveries)\[(\d+)\]\.?(\w+)?$/.exec(key);
      let target = null, slot = null;
      if (m) {
        const tr = byId(m[1] === "strata" ? "strata-rows" : "delivery-rows").querySelector('tr[data-sent="' + m[2] + '"]');
        target = tr && m[3] ? tr.querySelector('[data-key="' + m[3] + '"]') : null;
        slot = document.querySelector('[data-error-for="' + m[1] + '"]');
      } else {
        target = document.querySelector('[data-path="' + key + '"]');
        slot = document.querySelector('[data-error-for="' + key + '"]');
      }
      if (target) target.classList.add("invalid");
      const line = key + ": " + message;
      if (slot) slot.textContent = slot.textContent ? slot.textContent + " · " + line : line;
      else rest.push(line);
    });
    status("Not saved: " + Object.keys(errors || {}).length + " field(s) to correct. " + rest.join(" · "), "short");
    const first = document.querySelector(".invalid");
    if (first) first.focus();
  }

  async function putDirect(payload) {
    const response = await fetch(data.urls.record, {
      method: "PUT", credentials: "same-origin",
      headers: { "Content-Type": "application/json", "X-CSRFToken": csrf() },
      body: JSON.stringify(Object.assign({ client_id: newId() }, payload)),
    });
    let body = null;
    try { body = await response.json(); } catch (err) { body = null; }
    return { ok: response.ok, queued: false, status: response.status, body: body };
  }

  async function save(event) {
    event.preventDefault();
    const button = byId("save");
    const record = gather();
    record.progress = byId("f-progress").value;
    const payload = { base_version: data.version || 0, record: record };
    button.disabled = true;
    status("Saving…");
    try {
      const outbox = window.ToelineOutbox;
      const answer = outbox ? await outbox.saveRecord(data.project_id, data.mark, payload) : await putDirect(payload);
      handleAnswer(answer, record);
    } catch (err) {
      status("Not saved: " + (err && err.message ? err.message : err), "short");
    } finally {
      button.disabled = false;
    }
  }

  function handleAnswer(answer, record) {
    if (answer.queued && answer.conflict) {
      status("Kept on this tablet: the record changed on the server meanwhile. Open the outbox to compare and choose.", "short");
      return;
    }
    if (answer.queued) {
      data.record = record;
      status("Saved on this tablet; it will be sent and checked when the signal returns.", "waiting");
      return;
    }
    const body = answer.body || {};
    if (answer.ok) {
      clearErrors();
      data.version = body.version;
      data.record = record;
      data.progress = record.progress;
      data.result = body;
      byId("version-now").textContent = body.version;
      byId("progress-now").textContent = record.progress;
      status("Saved as version " + body.version + ".", "ok");
      showResult(body);
      byId("result").scrollIntoView({ block: "start" });
    } else if (answer.status === 422 && body.errors) {
      showErrors(body.errors);
    } else if (answer.status === 409 && body.error === "locked") {
      // A signed record: a change is an amendment with its reason, and needs a new sign-off.
      pendingAmendment = record;
      byId("amend-box").hidden = false;
      status("Not saved: " + (body.message || "this record is signed") +
             ". To change it, give the reason and save it as an amendment.", "short");
      byId("amend-reason").focus();
    } else if (answer.status === 409) {
      status("Not saved: " + (body.message || "the record changed on the server") +
             ". Reload the page to see the newest version.", "short");
    } else if (answer.status === 401) {
      status("Not saved: your login has expired. Log in again.", "short");
    } else {
      status("Not saved: " + (body.error || ("the server answered " + answer.status)), "short");
    }
  }

  let pendingAmendment = null;
  async function saveAmendment() {
    const reason = byId("amend-reason").value.trim();
    const rec = pendingAmendment;
    if (!rec) return;
    if (!reason) { status("Give the reason for the amendment first.", "short"); return; }
    byId("amend-save").disabled = true;
    try {
      const answer = await putDirect({ base_version: data.version || 0, record: rec, amendment: { reason: reason } });
      if (answer.ok) {
        byId("amend-box").hidden = true;
        byId("amend-reason").value = "";
        pendingAmendment = null;
      }
      handleAnswer(answer, rec);
    } catch (err) {
      status("Not saved: " + (err && err.message ? err.message : err), "short");
    } finally {
      byId("amend-save").disabled = false;
    }
  }

  // --- The result: verdict and every check, short first ------------------------------------------
  function showNumber(x, unit) {
    if (!isNum(x)) return "–";
    const a = Math.abs(x);
    const dp = a >= 100 ? 0 : a >= 10 ? 1 : a >= 1 ? 2 : 3;
    return (a >= 1000 ? grouped(x) : x.toFixed(dp)) + (unit ? " " + unit : "");
  }

  function showResult(body) {
    const verdict = byId("verdict");
    const checks = body.checks || [];
    const short = checks.filter((c) => c.ok === false);
    const open = checks.filter((c) => c.ok === null);
    const needs = body.verdict === "needs engineer";
    verdict.className = "verdict " + (needs ? "needs" : "meets");
    verdict.dataset.verdict = body.verdict;
    verdict.textContent = "";
    const strong = document.createElement("strong");
    strong.textContent = needs ? "NEEDS ENGINEER" : "MEETS DESIGN";
    verdict.append(strong, document.createTextNode(
      " — verdict: " + body.verdict + " (version " + body.version + "). " +
      (short.length ? short.length + " short: " + short.map((c) => c.code).join(", ") + ". " : "") +
      (open.length ? open.length + " not checked yet. " : "") +
      (needs ? "The engineer will review this pile." : "Every check is ok.")));
    const tbody = byId("checks-rows");
    tbody.textContent = "";
    checks.forEach((c) => {
      const tr = document.createElement("tr");
      const state = c.ok === false ? "short" : c.ok === true ? "ok" : "none";
      tr.className = "check " + state;
      tr.dataset.code = c.code;
      const td = (label, content, cls) => {
        const el = document.createElement("td");
        el.dataset.label = label;
        if (cls) el.className = cls;
        if (content instanceof Node) el.append(content); else el.textContent = content;
        tr.append(el);
      };
      td("Check", c.code);
      const badge = document.createElement("span");
      badge.className = "status " + state;
      badge.textContent = c.ok === false ? "short" : c.ok === true ? "ok" : "not checked";
      td("Result", badge);
      td("Value", showNumber(c.value, c.unit), "num");
      td("Limit", showNumber(c.limit, c.unit), "num");
      td("Why", c.reason);
      tbody.append(tr);
    });
    const notes = byId("result-notes");
    notes.textContent = "";
    (body.notes || []).forEach((n) => { const li = document.createElement("li"); li.textContent = n; notes.append(li); });
    const borrowed = byId("borrowed");
    borrowed.textContent = (body.borrowed || []).length
      ? "Used by the recheck: " + body.borrowed.map((b) => b.from_depth + "–" + b.to_depth + " m " + b.material +
          ": " + b.reason).join("; ") : "";
  }

  // --- Start -----------------------------------------------------------------------------------
  document.addEventListener("input", (event) => { if (event.target.closest("#rig-form, .save-bar, #sec-notes")) live(); });
  document.addEventListener("change", (event) => { if (event.target.closest("#rig-form")) live(); });
  document.querySelectorAll("[data-now]").forEach((b) => b.addEventListener("click", () => {
    const el = byId(b.dataset.now);
    el.value = toLocalInput(new Date().toISOString());
    live();
  }));
  byId("add-stratum").addEventListener("click", () => { addStratum(); live(); });
  byId("add-delivery").addEventListener("click", () => { addDelivery(); live(); });
  if (byId("save")) form.addEventListener("submit", save);
  if (byId("amend-save")) byId("amend-save").addEventListener("click", saveAmendment);
  if (window.ToelineRigPhotos) window.ToelineRigPhotos.start({ data: () => data, newId: newId, csrf: csrf });

  fill();
  if (window.ToelineRigLines) {
    window.ToelineRigLines.start({
      data: () => data, csrf: csrf,
      record: () => { const r = gather(); const p = byId("f-progress"); if (p) r.progress = p.value; return r; },
    });
  }

  // The project's rules from the bundle kept on this tablet: the offline estimate needs the
  // load basis (design approach, loads working or factored, load factor) for this rule version.
  async function rulesFromBundle() {
    const outbox = window.ToelineOutbox;
    if (!outbox || !outbox.getBundle) return;
    try {
      await outbox.ready;
      let bundle = await outbox.getBundle(data.project_id);
      if (!bundle || bundle.rules_version !== data.rules_version) {
        await new Promise((resolve) => {
          window.addEventListener("toeline:bundle", resolve, { once: true });
          setTimeout(resolve, 20000);
        });
        bundle = await outbox.getBundle(data.project_id);
      }
      if (bundle && bundle.rules && bundle.rules_version === data.rules_version && !data.rules) {
        data.rules = bundle.rules;
        live();
      }
    } catch (err) { /* the estimate says the load basis is not known */ }
  }
  rulesFromBundle();

  // The cached page of another pile (offline), or no signal: take the pile from the bundle.
  const urlMark = decodeURIComponent((/\/rig\/([^/]+)\/?$/.exec(location.pathname) || [])[1] || "");
  async function fromBundle() {
    const outbox = window.ToelineOutbox;
    if (!outbox || !outbox.pileOffline) return;
    try {
      await outbox.ready;
      const offline = await outbox.pileOffline(data.project_id, urlMark || data.mark);
      if (offline) {
        const shellMark = data.mark;
        data = Object.assign({}, data, offline, { urls: data.urls, can_record: data.can_record, rules: data.rules });
        if (urlMark && urlMark !== data.mark) data.mark = urlMark;
        if (data.mark !== shellMark) showOtherPile(shellMark);
        fill();
      }
    } catch (err) { /* keep the page as the server sent it */ }
  }

  // The worker served the cached page of another pile as the shell: retitle it for this pile,
  // and clear what belonged to the other one (its photos, its verdict). (static/outbox/bundle.js)
  function showOtherPile(shellMark) {
    const d = data.design || {};
    document.title = "Pile " + data.mark + " at the rig (offline) · Toeline";
    const h1 = document.querySelector(".rig-head h1");
    if (h1) h1.textContent = "Pile " + data.mark;
    const facts = document.querySelector(".pile-facts");
    if (facts) {
      facts.textContent = (d.pile_type || "") + " · Ø " + fixed(d.diameter_mm, 0) + " mm" +
        (d.cap ? " · cap " + d.cap : "") + " · load " + grouped(data.load_kn) + " kN · ";
      const prog = document.createElement("span"); prog.id = "progress-now";
      const ver = document.createElement("span"); ver.id = "version-now";
      facts.append(prog, document.createTextNode(" · version "), ver,
                   document.createTextNode(" · from the copy kept on this tablet"));
    }
    const enc = encodeURIComponent;
    Object.keys(data.urls || {}).forEach((k) => {
      data.urls[k] = data.urls[k].replace("/piles/" + enc(shellMark) + "/", "/piles/" + enc(data.mark) + "/");
    });
    byId("photo-list").textContent = "";
    if (!data.result) {
      const verdict = byId("verdict");
      verdict.className = "verdict none";
      verdict.textContent = "Not checked yet: save the record to run the recheck.";
      delete verdict.dataset.verdict;
      byId("checks-rows").textContent = "";
    }
  }

  // A save kept on this tablet reached the server (or met a conflict) while this page is open.
  window.addEventListener("toeline:sent", (event) => {
    const d = event.detail || {};
    if (!d.item || d.item.kind !== "record" || d.item.mark !== data.mark ||
        Number(d.item.project_id) !== Number(data.project_id) || !d.body) return;
    data.version = d.body.version;
    data.result = d.body;
    byId("version-now").textContent = d.body.version;
    const sentProgress = d.item.payload && d.item.payload.record ? d.item.payload.record.progress : null;
    if (d.body.progress || sentProgress) byId("progress-now").textContent = data.progress = d.body.progress || sentProgress;
    status("Sent from this tablet and saved as version " + d.body.version + ".", "ok");
    showResult(d.body);
  });
  window.addEventListener("toeline:conflict", (event) => {
    const d = event.detail || {};
    if (d.item && d.item.mark === data.mark && Number(d.item.project_id) === Number(data.project_id)) {
      status("Kept on this tablet: the record changed on the server meanwhile. Compare both in the outbox above and choose.", "short");
    }
  });

  if ((urlMark && urlMark !== data.mark) || navigator.onLine === false) fromBundle();

  window.ToelineRig = { data: () => data, fill: fill, live: live, gather: gather, showResult: showResult };
})();

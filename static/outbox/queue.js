// Toeline outbox, part 1 of 3: the queue (static/outbox/queue.js).
//
// Every save of a pile record and every photo is written to IndexedDB FIRST, with a client_id
// made here (crypto.randomUUID), and only then sent through the same API calls the page uses
// online. The server takes each client_id once, so a repeat (a lost answer, two tabs) gets the
// same answer and never a second version.
//
// Sending ("flush") runs one at a time (one shared promise, and a Web Lock across tabs), on a
// save, on the browser's `online` event, on a timer with backoff and on the "Send now" button.
// Before each flush a fresh CSRF token comes from /api/v1/session. An item leaves the queue
// only after a 2xx or a definite 4xx; a 409 conflict stays on the tablet and is shown with
// both versions side by side until the user chooses; an expired login keeps everything and
// asks to sign in again; the network failing or the server erring keeps everything and tries
// again later. Items the server refused for good (422, 403, 404, locked) are kept on the
// tablet, with the server's message, until the user dismisses them.
//
//
// The outbox is three plain scripts loaded in this order, sharing one internal namespace
// (window.ToelineOutboxParts): queue.js (IndexedDB, the queue, sending, conflicts),
// bundle.js (the project bundle and the pages kept for offline use) and panel.js (the header
// status, the outbox panel, start-up and the public API, window.ToelineOutbox).

(function () {
  "use strict";
  const O = window.ToelineOutboxParts || (window.ToelineOutboxParts = {});

  // --- IndexedDB -------------------------------------------------------------------------
  const DB_NAME = "toeline";
  const DB_VERSION = 1;
  let dbPromise = null;

  function openDb() {
    if (dbPromise) return dbPromise;
    dbPromise = new Promise((resolve, reject) => {
      const req = indexedDB.open(DB_NAME, DB_VERSION);
      req.onupgradeneeded = () => {
        const db = req.result;
        if (!db.objectStoreNames.contains("outbox")) {
          db.createObjectStore("outbox", { keyPath: "client_id" }).createIndex("seq", "seq");
        }
        if (!db.objectStoreNames.contains("bundles")) db.createObjectStore("bundles", { keyPath: "project_id" });
        if (!db.objectStoreNames.contains("versions")) db.createObjectStore("versions", { keyPath: "key" });
      };
      req.onsuccess = () => {
        const db = req.result;
        db.onversionchange = () => { db.close(); dbPromise = null; };
        resolve(db);
      };
      req.onerror = () => { dbPromise = null; reject(req.error); };
      req.onblocked = () => reject(new Error("the tablet's storage is held by another Toeline tab: close it"));
    });
    return dbPromise;
  }

  // Run fn(store) in one transaction; resolves with fn's request result once committed.
  async function tx(storeName, mode, fn) {
    const db = await openDb();
    return new Promise((resolve, reject) => {
      const t = db.transaction(storeName, mode, { durability: "strict" });
      const store = t.objectStore(storeName);
      let result;
      const req = fn(store);
      if (req) req.onsuccess = () => { result = req.result; };
      t.oncomplete = () => resolve(result);
      t.onerror = () => reject(t.error);
      t.onabort = () => reject(t.error || new Error("storage transaction aborted"));
    });
  }
  const idbGet = (store, key) => tx(store, "readonly", (s) => s.get(key));
  const idbPut = (store, value) => tx(store, "readwrite", (s) => s.put(value));
  const idbDelete = (store, key) => tx(store, "readwrite", (s) => s.delete(key));
  const idbAll = (store) => tx(store, "readonly", (s) => s.getAll());

  async function allItems() {
    const items = (await idbAll("outbox")) || [];
    return items.sort((a, b) => a.seq - b.seq);
  }

  // --- Small helpers ---------------------------------------------------------------------
  let seqCounter = 0;
  function nextSeq() { seqCounter = (seqCounter + 1) % 1000; return Date.now() * 1000 + seqCounter; }

  function newId() {
    if (window.crypto && typeof crypto.randomUUID === "function") return crypto.randomUUID();
    // Not a secure context (plain HTTP over the site network): no randomUUID, and no offline
    // use either; an id from getRandomValues still lets an online save be deduplicated.
    const b = crypto.getRandomValues(new Uint8Array(16));
    b[6] = (b[6] & 0x0f) | 0x40; b[8] = (b[8] & 0x3f) | 0x80;
    const h = Array.from(b, (x) => x.toString(16).padStart(2, "0")).join("");
    return `${h.slice(0, 8)}-${h.slice(8, 12)}-${h.slice(12, 16)}-${h.slice(16, 20)}-${h.slice(20)}`;
  }

  function pileKey(projectId, mark) { return projectId + "/" + mark; }
  function pileUrl(projectId, mark) {
    return "/api/v1/projects/" + encodeURIComponent(projectId) + "/piles/" + encodeURIComponent(mark);
  }
  function formatBytes(n) {
    if (n == null || !isFinite(n)) return "?";
    if (n < 1024) return n + " bytes";
    if (n < 1024 * 1024) return (n / 1024).toFixed(0) + " kB";
    if (n < 1024 * 1024 * 1024) return (n / 1048576).toFixed(1) + " MB";
    return (n / 1073741824).toFixed(2) + " GB";
  }
  function itemBytes(item) {
    let n = 200;
    if (item.payload) n += JSON.stringify(item.payload).length;
    if (item.photo && item.photo.blob) n += item.photo.blob.size;
    return n;
  }
  function emit(name, detail) { window.dispatchEvent(new CustomEvent("toeline:" + name, { detail: detail })); }

  const channel = ("BroadcastChannel" in window) ? new BroadcastChannel("toeline-outbox") : null;
  function changed() {
    if (channel) channel.postMessage({ type: "changed" });
    O.refreshStatus();
  }
  if (channel) channel.onmessage = () => O.refreshStatus();

  // --- State shown on screen -------------------------------------------------------------
  const state = {
    loginNeeded: false,
    lastError: "",
    failures: 0,
    timer: null,
    nextTryAt: 0,
    persisted: null,         // true, false (refused) or null (unknown / not supported)
    usage: null, quota: null,
    outboxBytes: 0,
    panelOpen: false,
  };
  const QUOTA_WARN = 0.8;    // warn when the site uses 80 % of what the browser allows
  const BACKOFF_MS = [5000, 10000, 30000, 60000, 120000, 300000];
  const TIMEOUT_RECORD_MS = 30000;
  const TIMEOUT_PHOTO_MS = 180000;

  // --- Storage: persistence and quota ----------------------------------------------------
  async function checkStorage(ask) {
    const s = navigator.storage;
    if (!s) return;
    try {
      if (s.persisted) state.persisted = await s.persisted();
      if (ask && state.persisted === false && s.persist) state.persisted = await s.persist();
    } catch (err) { state.persisted = null; }
    try {
      if (s.estimate) {
        const est = await s.estimate();
        state.usage = est.usage; state.quota = est.quota;
      }
    } catch (err) { /* keep the last figures */ }
  }

  // Before storing `bytes` more: a warning text when it would pass the warning level.
  async function quotaWarning(bytes) {
    await checkStorage(false);
    if (!state.quota) return "";
    const after = (state.usage || 0) + bytes;
    if (after > state.quota) {
      return "The tablet's storage for this site is full: " + formatBytes(after) + " needed, " +
        formatBytes(state.quota) + " allowed.";
    }
    if (after > QUOTA_WARN * state.quota) {
      return "Storage nearly full: " + formatBytes(after) + " of " + formatBytes(state.quota) +
        " allowed. Send the waiting items (or connect) before taking more photos.";
    }
    return "";
  }

  // --- Putting items in the outbox -------------------------------------------------------
  const answers = new Map();    // client_id -> {status, body} for saves waiting on an answer

  async function store(item) {
    try {
      await idbPut("outbox", item);
    } catch (err) {
      const full = err && (err.name === "QuotaExceededError" || /quota/i.test(String(err.message)));
      const why = full ? "the tablet's storage for this site is full" : String(err && err.message || err);
      const message = "NOT saved on the tablet: " + why + ". Keep this screen open and send the waiting items first.";
      state.lastError = message;
      state.panelOpen = true;
      O.renderPanel();
      throw new Error(message);
    }
    changed();
  }

  // The version this tablet last had acknowledged for a pile (only our own saves count, so a
  // newer version made elsewhere still shows up as a conflict).
  async function knownVersion(projectId, mark) {
    const row = await idbGet("versions", pileKey(projectId, mark));
    return row ? row.version : null;
  }

  // Save a pile record: stored first, then sent. Resolves with
  //   {ok: true, queued: false, status, body}   the server's 2xx answer (version, verdict, checks)
  //   {ok: false, queued: false, status, body}  refused for good (422 errors, 403, 404): not kept
  //   {queued: true, client_id, conflict?}      waiting on the tablet (offline, server busy,
  //                                             login needed, or a conflict to resolve)
  // Rejects only when the tablet could not store it (nothing was saved anywhere).
  async function saveRecord(projectId, mark, payload) {
    payload = payload || {};
    const record = payload.record !== undefined ? payload.record : payload;
    const item = {
      client_id: newId(), seq: nextSeq(), kind: "record", state: "waiting",
      project_id: Number(projectId), mark: String(mark), created_at: new Date().toISOString(),
      attempts: 0, last_error: "",
      payload: { base_version: payload.base_version === undefined ? null : payload.base_version, record: record },
    };
    const warn = await quotaWarning(itemBytes(item));
    if (warn) state.lastError = warn;
    await store(item);
    return await sendAndReport(item.client_id);
  }

  // Save a photo (a File or Blob, original bytes kept) for a pile: same answers as saveRecord.
  async function savePhoto(projectId, mark, file, options) {
    options = options || {};
    if (!(file instanceof Blob)) throw new Error("choose a photo file first");
    const item = {
      client_id: newId(), seq: nextSeq(), kind: "photo", state: "waiting",
      project_id: Number(projectId), mark: String(mark), created_at: new Date().toISOString(),
      attempts: 0, last_error: "",
      photo: { blob: file, filename: file.name || "photo.jpg", type: file.type || "application/octet-stream",
               size: file.size, kind: options.kind || "other", caption: options.caption || "" },
    };
    const warn = await quotaWarning(itemBytes(item));
    if (warn) {
      state.lastError = warn;
      state.panelOpen = true;
      O.renderPanel();
    }
    await store(item);
    return await sendAndReport(item.client_id);
  }

  async function sendAndReport(clientId) {
    answers.set(clientId, null);
    try {
      if (navigator.onLine !== false) await flush();
      const answer = answers.get(clientId);
      if (answer) return answer;
      const item = await idbGet("outbox", clientId);
      if (item && item.state === "conflict") return { queued: true, conflict: true, client_id: clientId, server: item.server };
      return { queued: true, client_id: clientId };
    } finally {
      answers.delete(clientId);
    }
  }

  // --- Sending ---------------------------------------------------------------------------
  let flushing = null;

  // Send what waits, one item at a time; returns the shared promise of the run in progress.
  function flush() {
    if (flushing) return flushing;
    flushing = (async () => {
      try {
        if (navigator.locks && navigator.locks.request) {
          await navigator.locks.request("toeline-outbox-flush", runFlush);
        } else {
          await runFlush();
        }
      } finally {
        flushing = null;
        O.refreshStatus();
      }
    })();
    return flushing;
  }

  async function freshToken() {
    let response;
    try {
      response = await fetch("/api/v1/session", { credentials: "same-origin", cache: "no-store",
                                                  headers: { Accept: "application/json" } });
    } catch (err) {
      return { retry: "no connection to the server" };
    }
    if (response.status === 401 || response.status === 403) return { login: true };
    if (!response.ok) return { retry: "the server answered " + response.status };
    let body = null;
    try { body = await response.json(); } catch (err) { return { login: true }; }
    if (!body || !body.user || !body.csrf_token) return { login: true };
    return { token: body.csrf_token };
  }

  async function runFlush() {
    let items = (await allItems()).filter((i) => i.state === "waiting");
    if (!items.length) { state.failures = 0; return; }
    const session = await freshToken();
    if (session.login) {
      state.loginNeeded = true;
      state.lastError = "";
      O.renderPanel();
      return;               // keep every item; try again after signing in
    }
    if (session.retry) { failed(session.retry); return; }
    state.loginNeeded = false;
    const tried = new Set();
    for (;;) {
      items = (await allItems()).filter((i) => i.state === "waiting" && !tried.has(i.client_id));
      if (!items.length) break;
      const item = items[0];
      tried.add(item.client_id);
      let response;
      try {
        response = await send(item, session.token);
      } catch (err) {
        await noteAttempt(item, "no answer from the server: " + (err && err.message || err));
        failed("no connection to the server");
        return;
      }
      const go = await settle(item, response);
      if (!go) return;
    }
    state.failures = 0;
    state.lastError = "";
    clearTimer();
  }

  async function send(item, token) {
    const controller = new AbortController();
    const limit = item.kind === "photo" ? TIMEOUT_PHOTO_MS : TIMEOUT_RECORD_MS;
    const timer = setTimeout(() => controller.abort(), limit);
    try {
      if (item.kind === "record") {
        let base = item.payload.base_version;
        const known = await knownVersion(item.project_id, item.mark);
        if (known !== null && (base === null || base === undefined || known > base)) base = known;
        return await fetch(pileUrl(item.project_id, item.mark) + "/record", {
          method: "PUT", credentials: "same-origin", signal: controller.signal,
          headers: { "Content-Type": "application/json", Accept: "application/json", "X-CSRFToken": token },
          body: JSON.stringify({ client_id: item.client_id, base_version: base, record: item.payload.record }),
        });
      }
      const form = new FormData();
      form.append("file", item.photo.blob, item.photo.filename);
      form.append("client_id", item.client_id);
      form.append("kind", item.photo.kind);
      form.append("caption", item.photo.caption);
      return await fetch(pileUrl(item.project_id, item.mark) + "/photos", {
        method: "POST", credentials: "same-origin", signal: controller.signal,
        headers: { Accept: "application/json", "X-CSRFToken": token }, body: form,
      });
    } finally {
      clearTimeout(timer);
    }
  }

  async function readBody(response) {
    const type = response.headers.get("Content-Type") || "";
    try {
      if (type.includes("json")) return await response.json();
      return { text: (await response.text()).slice(0, 500) };
    } catch (err) {
      return null;
    }
  }

  // Act on the server's answer; false stops this run (the rest waits for the next one).
  async function settle(item, response) {
    const status = response.status;
    const body = await readBody(response);
    const isJson = body && body.text === undefined;
    const waiter = answers.has(item.client_id);
    if (status >= 200 && status < 300) {
      await idbDelete("outbox", item.client_id);
      if (item.kind === "record" && body && typeof body.version === "number") {
        await idbPut("versions", { key: pileKey(item.project_id, item.mark), version: body.version });
        await O.noteInBundle(item, body);
      }
      if (waiter) answers.set(item.client_id, { ok: true, queued: false, status: status, body: body });
      emit("sent", { item: strip(item), status: status, body: body });
      changed();
      return true;
    }
    if (status === 401) {
      state.loginNeeded = true;
      await noteAttempt(item, "sign in again to send");
      O.renderPanel();
      return false;
    }
    if (status === 409 && isJson && body.error === "conflict" && item.kind === "record") {
      item.state = "conflict";
      item.server = body.server || {};
      item.last_error = body.message || "changed on the server since this tablet read it";
      await idbPut("outbox", item);
      state.panelOpen = true;
      emit("conflict", { item: strip(item), server: item.server });
      changed();
      return true;
    }
    const definite = isJson && [400, 403, 404, 409, 410, 413, 415, 422].includes(status);
    if (definite) {
      if (waiter) {
        // The page that saved it is still waiting and shows the answer beside the form.
        await idbDelete("outbox", item.client_id);
        answers.set(item.client_id, { ok: false, queued: false, status: status, body: body });
      } else {
        item.state = "rejected";
        item.status = status;
        item.server = body;
        item.last_error = describeRefusal(status, body);
        await idbPut("outbox", item);
        state.panelOpen = true;
      }
      emit("rejected", { item: strip(item), status: status, body: body });
      changed();
      return true;
    }
    // 429, 5xx, a CSRF refusal (HTML 400) or anything unexpected: keep it and try later.
    await noteAttempt(item, "the server answered " + status);
    failed("the server answered " + status);
    return false;
  }

  function describeRefusal(status, body) {
    if (body && body.errors) {
      return Object.keys(body.errors).map((k) => k + ": " + body.errors[k]).join("; ");
    }
    if (body && body.message) return body.message;
    if (body && body.error) return body.error + " (" + status + ")";
    return "refused by the server (" + status + ")";
  }

  function strip(item) {
    const out = Object.assign({}, item);
    if (out.photo) out.photo = Object.assign({}, out.photo, { blob: undefined });
    return out;
  }

  async function noteAttempt(item, message) {
    const fresh = await idbGet("outbox", item.client_id);
    if (!fresh) return;
    fresh.attempts = (fresh.attempts || 0) + 1;
    fresh.last_error = message;
    fresh.last_try = new Date().toISOString();
    await idbPut("outbox", fresh);
  }

  function failed(message) {
    state.lastError = message;
    state.failures += 1;
    const delay = BACKOFF_MS[Math.min(state.failures - 1, BACKOFF_MS.length - 1)];
    schedule(delay * (0.8 + 0.4 * Math.random()));
  }

  function schedule(delay) {
    clearTimer();
    state.nextTryAt = Date.now() + delay;
    state.timer = setTimeout(() => { state.timer = null; flush(); }, delay);
  }
  function clearTimer() {
    if (state.timer) clearTimeout(state.timer);
    state.timer = null;
    state.nextTryAt = 0;
  }

  // --- Conflicts and refusals ------------------------------------------------------------
  // Send the tablet's record as the newest version, on top of the server's.
  async function keepMine(clientId) {
    const item = await idbGet("outbox", clientId);
    if (!item || item.state !== "conflict") return null;
    item.payload.base_version = item.server && typeof item.server.version === "number"
      ? item.server.version : item.payload.base_version;
    item.state = "waiting";
    item.resolved_from = item.server;
    delete item.server;
    item.last_error = "";
    await idbPut("outbox", item);
    changed();
    return await sendAndReport(clientId);
  }

  // Keep the server's version: the tablet's copy is dropped (the user chose so, twice).
  async function keepServers(clientId) {
    const item = await idbGet("outbox", clientId);
    if (!item || item.state !== "conflict") return false;
    await idbDelete("outbox", clientId);
    changed();
    return true;
  }

  async function dismiss(clientId) {
    const item = await idbGet("outbox", clientId);
    if (!item || item.state !== "rejected") return false;
    await idbDelete("outbox", clientId);
    changed();
    return true;
  }


  // --- Shared with bundle.js and panel.js --------------------------------------------------
  Object.assign(O, {
    tx: tx, idbGet: idbGet, idbPut: idbPut, idbDelete: idbDelete, allItems: allItems,
    newId: newId, formatBytes: formatBytes, itemBytes: itemBytes, emit: emit, state: state,
    QUOTA_WARN: QUOTA_WARN, checkStorage: checkStorage, saveRecord: saveRecord, savePhoto: savePhoto,
    flush: flush, clearTimer: clearTimer, keepMine: keepMine, keepServers: keepServers, dismiss: dismiss,
  });
})();

// Toeline outbox, part 2 of 3: the project bundle and pages for offline use
// (static/outbox/bundle.js; after queue.js, before panel.js).
//
// The project bundle (/api/v1/projects/<id>/bundle) is kept in IndexedDB, refreshed when
// online, so the At the rig page works with no signal. A kept bundle names the audit head it
// stands for ("head"); the refresh asks for what changed since (?since=<head>) and applies the
// delta (applyDelta, as fieldapp.bundle_store.apply_delta); a bundle without a head is
// refreshed whole with If-None-Match. rigData puts one
// pile's rig data back together from it (the same assembly as
// fieldapp.offline.rig_data_from_bundle). The service worker is asked to keep the project's
// rig pages, and at log-out to drop them with the bundles.

(function () {
  "use strict";
  const O = window.ToelineOutboxParts;
  const { tx, idbGet, idbPut, allItems, emit, state } = O;

  // --- The project bundle ----------------------------------------------------------------
  async function getBundle(projectId) {
    const row = await idbGet("bundles", Number(projectId));
    return row ? row.data : null;
  }

  // Fetch the bundle when online (If-None-Match with the kept ETag); the kept copy otherwise.
  async function refreshBundle(projectId) {
    projectId = Number(projectId);
    const row = await idbGet("bundles", projectId);
    const headers = { Accept: "application/json" };
    const since = row && row.data && row.data.head ? row.data.head : "";
    if (!since && row && row.etag) headers["If-None-Match"] = row.etag;
    let response;
    try {
      response = await fetch("/api/v1/projects/" + projectId + "/bundle" +
                             (since ? "?since=" + encodeURIComponent(since) : ""),
                             { credentials: "same-origin", cache: "no-store", headers: headers });
    } catch (err) {
      return row ? row.data : null;
    }
    if (response.status === 304 && row) {
      row.checked_at = new Date().toISOString();
      await idbPut("bundles", row);
      return row.data;
    }
    if (response.ok) {
      let data = await response.json();
      if (data.delta) {
        if (!row || !row.data || data.since !== row.data.head) return row ? row.data : null;
        const changed = Object.keys(data.piles || {}).length;
        data = applyDelta(row.data, data);
        row.data = data;
        row.checked_at = new Date().toISOString();
        row.delta_piles = changed;
        await idbPut("bundles", row);
        if (changed || data.head !== since) emit("bundle", { project_id: projectId, delta: changed });
        return data;
      }
      await idbPut("bundles", { project_id: projectId, etag: response.headers.get("ETag"),
                                fetched_at: new Date().toISOString(), data: data });
      emit("bundle", { project_id: projectId });
      return data;
    }
    if (response.status === 401) { state.loginNeeded = true; O.renderPanel(); }
    return row ? row.data : null;
  }

  // The bundle at a delta's head: shared parts replaced when sent, keyed parts (piles, curves,
  // ground models) changed key by key (the same as fieldapp.bundle_store.apply_delta).
  function applyDelta(bundle, delta) {
    const out = Object.assign({}, bundle);
    ["format", "project", "rules_version", "rules", "limits"].forEach((k) => { if (k in delta) out[k] = delta[k]; });
    ["piles", "curves", "ground_models"].forEach((k) => {
      const part = Object.assign({}, bundle[k] || {});
      (delta[k + "_removed"] || []).forEach((key) => { delete part[key]; });
      Object.assign(part, delta[k] || {});
      out[k] = part;
    });
    out.head = delta.head;
    return out;
  }

  // After a save reached the server: the kept bundle learns the new version and verdict.
  async function noteInBundle(item, body) {
    const row = await idbGet("bundles", item.project_id);
    if (!row || !row.data || !row.data.piles || !row.data.piles[item.mark]) return;
    const pile = row.data.piles[item.mark];
    pile.version = body.version;
    pile.verdict = body.verdict;
    pile.progress = body.progress || pile.progress;
    pile.record = item.payload.record;
    pile.result = body;
    await idbPut("bundles", row);
  }

  // One pile's rig data (the shape of services.rig_data) from a bundle; null when absent.
  // The same assembly as fieldapp.offline.rig_data_from_bundle.
  function rigData(bundle, mark) {
    if (!bundle || !bundle.piles || !bundle.piles[mark]) return null;
    const pile = bundle.piles[mark];
    const ground = bundle.ground_models[pile.ground] || {};
    const keys = ["mark", "project_id", "version", "progress", "verdict", "design", "record", "result",
                  "load_kn", "curve_error", "required_toe_level", "rules_version"];
    const out = {};
    keys.forEach((k) => { if (k in pile) out[k] = pile[k]; });
    out.curve = pile.curve ? bundle.curves[pile.curve] : null;
    out.limits = bundle.limits;
    out.ground_top = ground.ground_top;
    out.ground_bottom = ground.ground_bottom;
    out.layers = ground.layers;
    return out;
  }

  // The rig data of a pile for offline use: from the kept bundle, with the newest record this
  // tablet saved for it (waiting or in conflict) in place of the server's.
  async function pileOffline(projectId, mark) {
    const data = rigData(await getBundle(projectId), mark);
    if (!data) return null;
    const mine = (await allItems()).filter((i) => i.kind === "record" && i.project_id === Number(projectId) &&
                                               i.mark === mark && i.state !== "rejected");
    if (mine.length) {
      data.record = mine[mine.length - 1].payload.record;
      data.pending = mine.length;
    }
    return data;
  }


  // --- Pages for offline use -------------------------------------------------------------
  function projectIdFromUrl() {
    const m = location.pathname.match(/^\/projects\/(\d+)(\/|$)/);
    return m ? Number(m[1]) : null;
  }

  // Ask the service worker to keep some pages of this project for offline use.
  function cachePages(urls) {
    if (!navigator.serviceWorker || !navigator.serviceWorker.controller || !urls.length) return Promise.resolve(null);
    return new Promise((resolve) => {
      const ch = new MessageChannel();
      ch.port1.onmessage = (e) => resolve(e.data);
      navigator.serviceWorker.controller.postMessage({ type: "cache-pages", urls: urls }, [ch.port2]);
      setTimeout(() => resolve(null), 30000);
    });
  }

  function forgetPages() {
    if (!navigator.serviceWorker || !navigator.serviceWorker.controller) return Promise.resolve();
    return new Promise((resolve) => {
      const ch = new MessageChannel();
      ch.port1.onmessage = () => resolve();
      navigator.serviceWorker.controller.postMessage({ type: "forget-pages" }, [ch.port2]);
      setTimeout(resolve, 1000);
    });
  }

  // On a project's page, once per session: keep the At the rig pick page and one pile's rig
  // page in the worker's cache, so that any pile of the project opens offline (the worker
  // serves that page as the shell and rig.js fills the pile in from the bundle).
  async function warmProject(projectId, bundle) {
    const key = "toeline-warm-" + projectId;
    try { if (sessionStorage.getItem(key)) return; } catch (err) { /* private mode */ }
    if (!bundle || !bundle.piles || !navigator.serviceWorker || !navigator.serviceWorker.controller) return;
    const marks = Object.keys(bundle.piles);
    if (!marks.length) return;
    const base = "/projects/" + projectId + "/rig";
    const answer = await cachePages([base, base + "/" + encodeURIComponent(marks[0])]);
    if (answer && answer.ok) {
      try { sessionStorage.setItem(key, "1"); } catch (err) { /* private mode */ }
    }
  }

  // At log-out: drop the cached pages and project bundles (another person may use the tablet
  // next); the outbox stays, and is sent when someone signs in again.
  function hookLogout() {
    document.querySelectorAll("form.logout").forEach((form) => {
      form.addEventListener("submit", (event) => {
        if (form.dataset.cleared) return;
        event.preventDefault();
        const done = () => { form.dataset.cleared = "1"; form.submit(); };
        try { sessionStorage.clear(); } catch (err) { /* private mode */ }
        Promise.all([forgetPages(), tx("bundles", "readwrite", (s) => s.clear())]).then(done, done);
      });
    });
  }

  // --- Shared with queue.js and panel.js ---------------------------------------------------
  Object.assign(O, {
    getBundle: getBundle, refreshBundle: refreshBundle, noteInBundle: noteInBundle, rigData: rigData,
    applyDelta: applyDelta,
    pileOffline: pileOffline, projectIdFromUrl: projectIdFromUrl, cachePages: cachePages,
    warmProject: warmProject, hookLogout: hookLogout,
  });
})();

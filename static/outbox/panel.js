// Toeline outbox, part 3 of 3: what the user sees, start-up and the public API
// (static/outbox/panel.js; after queue.js and bundle.js).
//
// The header shows "n waiting" (0 included), items to resolve and refused items; tapping it
// opens the outbox panel: storage and quota, sign-in and HTTPS prompts, every item kept on
// the tablet, a conflict side by side with the server's version. Public API:
// window.ToelineOutbox (at the end of this file).

(function () {
  "use strict";
  const O = window.ToelineOutboxParts;
  const { allItems, itemBytes, formatBytes, emit, state, QUOTA_WARN, checkStorage, flush, clearTimer,
          keepMine, keepServers, dismiss, getBundle, refreshBundle, projectIdFromUrl, warmProject,
          hookLogout, newId, saveRecord, savePhoto, rigData, pileOffline, cachePages } = O;

  // --- Header status, "Send now" and the outbox panel --------------------------------------
  async function counts() {
    const items = await allItems();
    const c = { waiting: 0, conflict: 0, rejected: 0, bytes: 0, items: items };
    items.forEach((i) => { c[i.state] = (c[i.state] || 0) + 1; c.bytes += itemBytes(i); });
    return c;
  }

  function showNet() {
    const el = document.getElementById("net-status");
    if (!el) return;
    const online = navigator.onLine !== false;
    el.textContent = online ? "online" : "offline";
    el.classList.toggle("offline", !online);
    el.dataset.state = online ? "online" : "offline";
  }

  let lastCounts = { waiting: 0, conflict: 0, rejected: 0, bytes: 0, items: [] };
  async function refreshStatus() {
    showNet();
    try { lastCounts = await counts(); } catch (err) { return; }
    state.outboxBytes = lastCounts.bytes;
    const el = document.getElementById("outbox-status");
    if (el) {
      const parts = [lastCounts.waiting + " waiting"];  // always shown, 0 included
      if (lastCounts.conflict) parts.push(lastCounts.conflict + " to resolve");
      if (lastCounts.rejected) parts.push(lastCounts.rejected + " refused");
      if (lastCounts.waiting && state.persisted === false) parts.push("storage not guaranteed");
      el.textContent = parts.join(" · ");
      el.dataset.waiting = String(lastCounts.waiting);
      el.dataset.conflicts = String(lastCounts.conflict);
      el.title = "Saved on this tablet, not yet on the server. Tap for details.";
    }
    ensureButtons();
    const send = document.getElementById("outbox-send");
    if (send) {
      send.hidden = !(lastCounts.waiting > 0);
      send.style.display = send.hidden ? "none" : "";  // .btn sets display, which beats [hidden]
    }
    emit("outbox", { waiting: lastCounts.waiting, conflict: lastCounts.conflict, rejected: lastCounts.rejected });
    renderPanel();
  }

  function ensureButtons() {
    const status = document.getElementById("outbox-status");
    if (!status || document.getElementById("outbox-send")) return;
    status.setAttribute("role", "button");
    status.tabIndex = 0;
    const toggle = () => {
      state.panelOpen = !state.panelOpen;
      renderPanel();
      const panel = document.getElementById("outbox-panel");
      if (state.panelOpen && panel && !panel.hidden) panel.scrollIntoView({ block: "nearest" });  // on screen
    };
    status.addEventListener("click", toggle);
    status.addEventListener("keydown", (e) => { if (e.key === "Enter" || e.key === " ") { e.preventDefault(); toggle(); } });
    const send = document.createElement("button");
    send.type = "button";
    send.id = "outbox-send";
    send.className = "btn small";
    send.textContent = "Send now";
    send.hidden = true;
    send.style.display = "none";
    send.addEventListener("click", () => { clearTimer(); flush(); });
    status.insertAdjacentElement("afterend", send);
  }

  function el(tag, attrs, children) {
    const node = document.createElement(tag);
    Object.keys(attrs || {}).forEach((k) => {
      if (k === "text") node.textContent = attrs[k];
      else if (k === "class") node.className = attrs[k];
      else node.setAttribute(k, attrs[k]);
    });
    (children || []).forEach((c) => { if (c) node.appendChild(typeof c === "string" ? document.createTextNode(c) : c); });
    return node;
  }

  function panelNode() {
    let panel = document.getElementById("outbox-panel");
    if (!panel) {
      const main = document.querySelector("main") || document.body;
      panel = el("section", { id: "outbox-panel", class: "card outbox-panel", "aria-live": "polite" });
      panel.hidden = true;
      main.insertBefore(panel, main.firstChild);
    }
    return panel;
  }

  function renderPanel() {
    if (!document.body) return;
    const c = lastCounts;
    const insecure = window.isSecureContext === false;
    const attention = state.loginNeeded || c.conflict > 0 || c.rejected > 0 || nearlyFull() || insecure;
    const panel = panelNode();
    panel.hidden = !(state.panelOpen || attention);
    if (panel.hidden) return;
    panel.textContent = "";
    panel.appendChild(el("h2", { text: "Outbox: saved on this tablet" }));
    if (state.loginNeeded) {
      const next = location.pathname + location.search;
      panel.appendChild(el("p", { class: "flash", role: "alert", id: "outbox-login" }, [
        "Your sign-in has expired. Everything waiting stays on this tablet. ",
        el("a", { class: "btn primary", href: "/login?next=" + encodeURIComponent(next), text: "Sign in again" }),
      ]));
    }
    if (insecure) {
      panel.appendChild(el("p", { class: "flash", role: "alert", id: "outbox-insecure" }, [
        "This page came over plain HTTP, so the browser will not keep Toeline for use with no signal. " +
        "Use the https:// address of the site laptop. ",
        el("a", { href: "/site-ca", text: "How to set up the tablet" }),
      ]));
    }
    const warn = storageWarning();
    if (warn) panel.appendChild(el("p", { class: "flash", role: "alert", id: "outbox-storage-warning", text: warn }));
    panel.appendChild(el("p", { id: "outbox-storage", text: storageLine() }));
    if (state.lastError && c.waiting) {
      const when = state.nextTryAt ? " Next try at " + new Date(state.nextTryAt).toLocaleTimeString() + "." : "";
      panel.appendChild(el("p", { text: "Not sent yet: " + state.lastError + "." + when }));
    }
    if (!c.items.length) {
      panel.appendChild(el("p", { text: "Nothing waiting: everything saved on this tablet is on the server." }));
    }
    c.items.forEach((item) => panel.appendChild(itemNode(item)));
  }

  function storageLine() {
    const parts = ["Outbox holds " + formatBytes(state.outboxBytes) + "."];
    if (state.quota) {
      parts.push("This site uses " + formatBytes(state.usage) + " of " + formatBytes(state.quota) +
        " the browser allows (" + Math.round(100 * (state.usage || 0) / state.quota) + " %).");
    }
    if (state.persisted === true) parts.push("The browser keeps this storage until you clear it.");
    return parts.join(" ");
  }

  function nearlyFull() {
    return Boolean((state.quota && state.usage > QUOTA_WARN * state.quota) ||
                   (state.lastError && /storage|full/i.test(state.lastError)));
  }

  function storageWarning() {
    const out = [];
    if (state.persisted === false) {
      out.push("The browser did not agree to keep this site's storage for good: if the tablet runs short " +
        "of space it may clear it. Send waiting items when you have signal; installing the app to the " +
        "home screen usually lets the browser keep it.");
    }
    if (state.quota && state.usage > QUOTA_WARN * state.quota) {
      out.push("Storage nearly full: " + formatBytes(state.usage) + " of " + formatBytes(state.quota) +
        ". Send the waiting items before taking more photos.");
    }
    if (state.lastError && /storage|full/i.test(state.lastError)) out.push(state.lastError);
    return out.join(" ");
  }

  function itemNode(item) {
    const what = item.kind === "photo"
      ? "Photo (" + item.photo.kind + ", " + formatBytes(item.photo.size) + ")"
      : "Record" + (item.payload.record && item.payload.record.progress ? " (" + item.payload.record.progress + ")" : "");
    const box = el("div", { class: "outbox-item " + item.state, "data-client-id": item.client_id, "data-state": item.state });
    box.appendChild(el("p", {}, [el("strong", { text: "Pile " + item.mark + ": " + what }),
      " saved " + new Date(item.created_at).toLocaleString() + " · " + stateWords(item)]));
    if (item.state === "conflict") box.appendChild(conflictNode(item));
    if (item.state === "rejected") {
      box.appendChild(el("p", { class: "error", text: "Refused by the server: " + item.last_error }));
      const keep = el("button", { type: "button", class: "btn small", text: "Dismiss (I have re-entered it)" });
      keep.addEventListener("click", () => dismiss(item.client_id));
      box.appendChild(keep);
    }
    return box;
  }

  function stateWords(item) {
    if (item.state === "waiting") return item.attempts ? "waiting, tried " + item.attempts + "×" : "waiting";
    if (item.state === "conflict") return "changed on the server meanwhile: choose which to keep";
    return "refused";
  }

  function show(value) {
    if (value === undefined || value === null || value === "") return "—";
    if (typeof value === "object") return JSON.stringify(value);
    return String(value);
  }

  function conflictNode(item) {
    const mine = item.payload.record || {};
    const server = item.server || {};
    const theirs = server.record || {};
    const keys = Array.from(new Set(Object.keys(mine).concat(Object.keys(theirs)))).sort();
    const table = el("table", { class: "conflict" }, [
      el("caption", { text: "Pile " + item.mark + ": this tablet's record beside the server's version " +
        show(server.version) + (server.created_by ? " (" + server.created_by + ", " + show(server.created_at) + ")" : "") }),
      el("thead", {}, [el("tr", {}, [el("th", { text: "Field" }), el("th", { text: "On this tablet" }),
                                      el("th", { text: "On the server" })])]),
    ]);
    const body = el("tbody");
    keys.forEach((k) => {
      const a = show(mine[k]);
      const b = show(theirs[k]);
      const row = el("tr", { class: a === b ? "same" : "differs" }, [
        el("th", { text: k + (a === b ? "" : " (differs)") }), el("td", { text: a }), el("td", { text: b })]);
      body.appendChild(row);
    });
    table.appendChild(body);
    const wrap = el("div", { class: "conflict-choice" }, [table]);
    const mineBtn = el("button", { type: "button", class: "btn primary", "data-action": "keep-mine",
                                   text: "Send this tablet's record as the newest version" });
    mineBtn.addEventListener("click", () => keepMine(item.client_id));
    const theirsBtn = el("button", { type: "button", class: "btn", "data-action": "keep-server",
                                     text: "Keep the server's version" });
    theirsBtn.addEventListener("click", () => {
      if (theirsBtn.dataset.armed) { keepServers(item.client_id); return; }
      theirsBtn.dataset.armed = "1";
      theirsBtn.textContent = "Tap again to discard this tablet's record";
    });
    wrap.appendChild(el("p", { text: "Both versions are kept until you choose. Sending the tablet's record keeps the " +
      "server's version in the pile's history." }));
    wrap.appendChild(mineBtn);
    wrap.appendChild(document.createTextNode(" "));
    wrap.appendChild(theirsBtn);
    return wrap;
  }


  // --- Start ------------------------------------------------------------------------------
  async function start() {
    showNet();
    hookLogout();
    await checkStorage(true);
    await refreshStatus();
    window.addEventListener("online", () => { showNet(); clearTimer(); flush(); const p = projectIdFromUrl(); if (p) refreshBundle(p); });
    window.addEventListener("offline", () => { showNet(); refreshStatus(); });
    document.addEventListener("visibilitychange", () => { if (!document.hidden && navigator.onLine !== false) flush(); });
    const projectId = projectIdFromUrl();
    if (projectId && navigator.onLine !== false) {
      refreshBundle(projectId).then((bundle) => warmProject(projectId, bundle)).catch(() => {});
    }
    if (projectId && navigator.serviceWorker) {
      // First visit: the worker takes control of this page only now; keep the rig shell then.
      navigator.serviceWorker.addEventListener("controllerchange", () => {
        getBundle(projectId).then((bundle) => warmProject(projectId, bundle)).catch(() => {});
      });
    }
    if (navigator.onLine !== false) flush();
  }

  O.renderPanel = renderPanel;
  O.refreshStatus = refreshStatus;

  const ready = new Promise((resolve) => {
    const go = () => start().then(resolve, (err) => { console.error("outbox", err); resolve(); });
    if (document.readyState === "loading") document.addEventListener("DOMContentLoaded", go);
    else go();
  });

  window.ToelineOutbox = {
    ready: ready,
    newId: newId,
    saveRecord: saveRecord,
    savePhoto: savePhoto,
    flush: flush,
    items: allItems,
    counts: () => counts().then((c) => ({ waiting: c.waiting, conflict: c.conflict, rejected: c.rejected, bytes: c.bytes })),
    keepMine: keepMine,
    keepServers: keepServers,
    dismiss: dismiss,
    getBundle: getBundle,
    refreshBundle: refreshBundle,
    rigData: rigData,
    pileOffline: pileOffline,
    cachePages: cachePages,
    storage: () => checkStorage(false).then(() => ({ persisted: state.persisted, usage: state.usage,
                                                     quota: state.quota, outbox: state.outboxBytes })),
  };
})();
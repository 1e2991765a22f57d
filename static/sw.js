// Toeline service worker: the app shell for working with no signal.
//
// Served by /sw.js (fieldapp/offline.py), which fills in the version (a hash of every static
// file, so any change to the shell installs a new worker) and the list of static files.
//
// - install:  pre-cache the static shell (every file must arrive, or the worker is not
//             installed and the old one keeps serving) and, when signed in, the start page.
// - activate: delete the caches of older versions; take control of open pages.
// - fetch:    pages (navigations) network-first, the cached copy when the network fails (a
//             page never kept: a page saying so, with links to the pages that are kept);
//             static files cache-first; everything else, including every API call, straight
//             to the network and never cached here (records and photos wait in the outbox in
//             IndexedDB, see static/outbox/queue.js; the project bundle is kept there too, see
//             static/outbox/bundle.js).

"use strict";

// --- Names --------------------------------------------------------------------------------
const VERSION = "/*VERSION*/";
const CACHE = "toeline-shell-" + VERSION;
const CACHE_PREFIX = "toeline-shell-";
const STATIC_FILES = [/*STATIC_FILES*/];
const MANIFEST = "/manifest.webmanifest";
const PAGES = ["/"];            // pre-cached when the user is signed in (else skipped)

// --- Install: pre-cache the shell, awaited ------------------------------------------------
self.addEventListener("install", (event) => {
  event.waitUntil((async () => {
    const cache = await caches.open(CACHE);
    await cache.addAll(STATIC_FILES.concat([MANIFEST]));
    for (const url of PAGES) {
      try {
        const response = await fetch(url, { credentials: "same-origin" });
        if (isCacheablePage(response)) await cache.put(url, response);
      } catch (err) {
        // No network for the page: it is cached on the first visit instead.
      }
    }
    await self.skipWaiting();
  })());
});

// --- Activate: remove old caches, take control ---------------------------------------------
self.addEventListener("activate", (event) => {
  event.waitUntil((async () => {
    const names = await caches.keys();
    await Promise.all(names
      .filter((name) => name.startsWith(CACHE_PREFIX) && name !== CACHE)
      .map((name) => caches.delete(name)));
    await self.clients.claim();
  })());
});

// --- Fetch --------------------------------------------------------------------------------
self.addEventListener("fetch", (event) => {
  const request = event.request;
  if (request.method !== "GET") return;                 // writes always go to the network
  const url = new URL(request.url);
  if (url.origin !== self.location.origin) return;
  if (url.pathname.startsWith("/api/")) return;         // API: network only, never cached here
  if (request.mode === "navigate") {
    event.respondWith(pageNetworkFirst(request, url));
  } else if (url.pathname.startsWith("/static/") || url.pathname === MANIFEST) {
    event.respondWith(staticCacheFirst(request));
  }
});

// A page worth keeping: a full 200 answer that is not the login page we were sent to.
function isCacheablePage(response) {
  if (!response || !response.ok || response.status !== 200) return false;
  if (response.redirected && new URL(response.url).pathname === "/login") return false;
  const type = response.headers.get("Content-Type") || "";
  return type.startsWith("text/html");
}

async function pageNetworkFirst(request, url) {
  const cache = await caches.open(CACHE);
  try {
    const response = await fetch(request);
    if (isCacheablePage(response) && !response.redirected) {
      await cache.put(url.pathname + url.search, response.clone());
    }
    return response;
  } catch (err) {
    const cached = (await cache.match(url.pathname + url.search, { ignoreVary: true })) ||
                   (await cache.match(url.pathname, { ignoreSearch: true, ignoreVary: true })) ||
                   (await rigShellFor(cache, url));
    if (cached) return cached;
    return offlinePage(cache, url);
  }
}

// A pile's rig page never opened on this tablet: the rig page of another pile of the same
// project is the same shell (rig.js fills the pile in from the bundle kept in IndexedDB).
async function rigShellFor(cache, url) {
  const rig = url.pathname.match(/^(\/projects\/\d+\/rig\/)/);
  if (!rig) return null;
  const keys = await cache.keys();
  for (const key of keys) {
    const path = new URL(key.url).pathname;
    if (path.startsWith(rig[1]) && path !== rig[1]) return cache.match(key, { ignoreVary: true });
  }
  return null;
}

function escapeHtml(text) {
  return String(text).replace(/[&<>"']/g, (c) => ({ "&": "&amp;", "<": "&lt;", ">": "&gt;", '"': "&quot;", "'": "&#39;" })[c]);
}

// The pages this tablet keeps (path and title), the rig pages first.
async function keptPages(cache) {
  const out = [];
  for (const key of await cache.keys()) {
    const u = new URL(key.url);
    if (u.pathname.startsWith("/static/") || u.pathname === MANIFEST) continue;
    let title = u.pathname;
    try {
      const html = await (await cache.match(key, { ignoreVary: true })).text();
      const m = /<title>([^<]*)<\/title>/i.exec(html);
      if (m) title = m[1].replace(/&amp;/g, "&").replace(/&#39;/g, "'").replace(/&quot;/g, '"').replace(/ · Toeline$/, "").trim();
    } catch (err) { /* keep the path as its name */ }
    out.push({ href: u.pathname + u.search, title: title, rig: /\/rig(\/|$)/.test(u.pathname) });
  }
  return out.sort((a, b) => (b.rig - a.rig) || a.href.localeCompare(b.href)).slice(0, 40);
}

// A page not kept on this tablet: say so, say what is kept, and link to it (never another page
// in its place).
async function offlinePage(cache, url) {
  const kept = await keptPages(cache);
  const items = kept.map((p) => "<li><a class=btn href='" + escapeHtml(p.href) + "'>" + escapeHtml(p.title) +
    "</a></li>").join("");
  const rigNote = kept.some((p) => /\/rig\/[^/]+$/.test(p.href))
    ? "<p>Every pile of a project whose At the rig page is kept opens offline from there.</p>" : "";
  const body = "<!doctype html><html lang=en><meta charset=utf-8><meta name=viewport content='width=device-width, initial-scale=1'>" +
    "<title>Not available offline · Toeline</title><link rel=stylesheet href='/static/app.css'>" +
    "<main class=offline-page><h1>Not available offline</h1>" +
    "<p id=offline-missing>No signal, and <strong>" + escapeHtml(url.pathname) + "</strong> was not opened on this " +
    "tablet while online, so it was not kept.</p>" +
    (kept.length ? "<h2>Kept on this tablet, open with no signal</h2><ul id=offline-kept class=kept-pages>" + items + "</ul>" + rigNote
                 : "<p>No pages are kept on this tablet yet: open a project's At the rig page once while online.</p>") +
    "<p>Records and photos saved on this tablet are kept and are sent when the signal returns.</p></main></html>";
  return new Response(body, { status: 503, headers: { "Content-Type": "text/html; charset=utf-8" } });
}

async function staticCacheFirst(request) {
  const cache = await caches.open(CACHE);
  const cached = await cache.match(request, { ignoreSearch: true });
  if (cached) return cached;
  const response = await fetch(request);
  if (response.ok) await cache.put(request, response.clone());
  return response;
}

// --- Messages from pages ------------------------------------------------------------------
// {type: "cache-pages", urls: [...]}: keep these pages for offline use (the rig pages of the
// project the user opened). {type: "forget-pages"}: drop every cached page (at log-out); the
// static shell stays. Replies on the message port with {ok, cached}.
self.addEventListener("message", (event) => {
  const data = event.data || {};
  const reply = (msg) => { if (event.ports && event.ports[0]) event.ports[0].postMessage(msg); };
  if (data.type === "cache-pages" && Array.isArray(data.urls)) {
    event.waitUntil((async () => {
      const cache = await caches.open(CACHE);
      let cached = 0;
      for (const raw of data.urls.slice(0, 50)) {
        const url = new URL(raw, self.location.origin);
        if (url.origin !== self.location.origin || url.pathname.startsWith("/api/")) continue;
        try {
          const response = await fetch(url.pathname + url.search, { credentials: "same-origin" });
          if (isCacheablePage(response) && !response.redirected) {
            await cache.put(url.pathname + url.search, response);
            cached += 1;
          }
        } catch (err) { /* offline: try again next time */ }
      }
      reply({ ok: true, cached: cached });
    })());
  } else if (data.type === "forget-pages") {
    event.waitUntil((async () => {
      const cache = await caches.open(CACHE);
      const keys = await cache.keys();
      for (const key of keys) {
        const path = new URL(key.url).pathname;
        if (!path.startsWith("/static/") && path !== MANIFEST) await cache.delete(key);
      }
      reply({ ok: true });
    })());
  }
});

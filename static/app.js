// Toeline: shared page behaviour. Plain JS, no build step.

// --- Connection status -----------------------------------------------------------------------
(function () {
  "use strict";
  var el = document.getElementById("net-status");
  function show() {
    if (!el) return;
    el.textContent = navigator.onLine ? "online" : "offline";
    el.classList.toggle("offline", !navigator.onLine);
  }
  window.addEventListener("online", show);
  window.addEventListener("offline", show);
  show();
})();

// --- Service worker (offline use; see static/sw.js and static/outbox/) ----------------------
// Only in a secure context (https, or localhost): on plain HTTP over the site network the
// browser has no service worker, and the page says how to get HTTPS (/site-ca).
(function () {
  "use strict";
  if (!("serviceWorker" in navigator)) {
    if (!window.isSecureContext) document.documentElement.dataset.insecure = "1";
    return;
  }
  window.addEventListener("load", function () {
    navigator.serviceWorker.register("/sw.js", { scope: "/" }).catch(function (err) {
      console.warn("service worker not registered:", err);
    });
  });
})();

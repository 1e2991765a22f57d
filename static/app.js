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

/* Record screen: follow a background build of the certification record.
   The build's progress is stored on the server, so this only polls it: a reload, another tab
   or a lost connection picks up where the build is. No inline scripts: the job comes in
   <script type="application/json" id="record-job-data">. */
(function () {
  "use strict";

  // --- elements ---------------------------------------------------------------------------
  var dataEl = document.getElementById("record-job-data");
  if (!dataEl) { return; }
  var job = JSON.parse(dataEl.textContent);
  var box = document.getElementById("record-job");
  var state = document.getElementById("record-state");
  var count = document.getElementById("record-count");
  var bar = document.getElementById("record-progress");
  var error = document.getElementById("record-error");
  var done = document.getElementById("record-done");
  var link = document.getElementById("record-download");
  var hash = document.getElementById("record-hash");
  var start = document.getElementById("record-start");
  var base = JSON.parse(document.getElementById("record-status-base").textContent);
  var statusUrl = base + "/builds/" + job.id;

  // --- showing a job --------------------------------------------------------------------------
  function show(j) {
    box.hidden = false;
    state.textContent = j.status;
    count.textContent = j.done + " of " + j.total + " piles (" + j.percent + " %)";
    bar.value = j.percent;
    bar.textContent = j.percent + " %";
    error.hidden = !j.error;
    error.textContent = j.error || "";
    var finished = j.status === "done" || j.status === "failed";
    if (start) { start.disabled = !finished; }
    if (j.status === "done" && j.download) {
      link.href = j.download;
      done.hidden = false;
      if (j.head_hash) { hash.textContent = "audit head hash " + j.head_hash; }
    }
    return finished;
  }

  // --- polling ----------------------------------------------------------------------------------
  function poll() {
    fetch(statusUrl, { credentials: "same-origin", headers: { "Accept": "application/json" } })
      .then(function (r) { if (!r.ok) { throw new Error("HTTP " + r.status); } return r.json(); })
      .then(function (j) { if (!show(j)) { setTimeout(poll, 1000); } })
      .catch(function () { setTimeout(poll, 3000); });  // offline or busy: keep trying, slower
  }

  if (!show(job)) { setTimeout(poll, 500); }
})();

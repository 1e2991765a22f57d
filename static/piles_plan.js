// Toeline: the site plan of the Piles screen, drawn on a canvas so a schedule of any size
// (20,000 piles) draws in one pass. The points come from plan.json (positions in decimetres
// from an origin, one state number each, named in the legend). Tap a pile to name it (the
// nearest within a finger's width); drag across an area to filter the schedule to it (the
// bbox filter, E N E N in metres); zoom with the buttons, move the plan in "Move the plan" mode.

(function () {
  "use strict";
  const section = document.querySelector("section.plan[data-plan]");
  if (!section) return;
  const canvas = section.querySelector("canvas.site-plan");
  const picked = section.querySelector(".plan-picked");
  const ctx = canvas.getContext("2d");
  const COLOURS = ["#8a8f98", "#1f5fbf", "#1d7a3a", "#c0262d"];
  const TOUCH_PX = 24;
  let data = null;
  let view = null; // {e, n, scale}: the plan metre at the canvas's top-left, px per metre
  let panMode = false;

  function fitAll() {
    const p = data.points;
    let minE = Infinity, minN = Infinity, maxE = -Infinity, maxN = -Infinity;
    for (let i = 0; i < p.length; i += 3) {
      minE = Math.min(minE, p[i]); maxE = Math.max(maxE, p[i]);
      minN = Math.min(minN, p[i + 1]); maxN = Math.max(maxN, p[i + 1]);
    }
    if (!isFinite(minE)) { minE = minN = 0; maxE = maxN = 10; }
    const w = Math.max(1, (maxE - minE) / 10), h = Math.max(1, (maxN - minN) / 10);
    const scale = Math.min((canvas.width - 20) / w, (canvas.height - 20) / h);
    const midE = data.origin[0] + (minE + maxE) / 20, midN = data.origin[1] + (minN + maxN) / 20;
    view = { e: midE - canvas.width / 2 / scale, n: midN + canvas.height / 2 / scale, scale: scale }; // centred
  }

  function toPx(de, dn) {
    return [(data.origin[0] + de / 10 - view.e) * view.scale, (view.n - data.origin[1] - dn / 10) * view.scale];
  }

  function toPlan(x, y) { return [view.e + x / view.scale, view.n - y / view.scale]; }

  function draw(box) {
    ctx.clearRect(0, 0, canvas.width, canvas.height);
    const p = data.points;
    const r = Math.max(1.5, Math.min(5, view.scale * 0.3));
    for (let state = 0; state < COLOURS.length; state++) { // needs engineer drawn last, on top
      ctx.fillStyle = COLOURS[state];
      const size = state === 3 ? r * 1.6 : r;
      for (let i = 0; i < p.length; i += 3) {
        if (p[i + 2] !== state) continue;
        const xy = toPx(p[i], p[i + 1]);
        if (xy[0] < -5 || xy[1] < -5 || xy[0] > canvas.width + 5 || xy[1] > canvas.height + 5) continue;
        ctx.fillRect(xy[0] - size, xy[1] - size, 2 * size, 2 * size);
      }
    }
    if (box) {
      ctx.strokeStyle = "#000"; ctx.lineWidth = 2;
      ctx.strokeRect(box[0], box[1], box[2] - box[0], box[3] - box[1]);
    }
  }

  function canvasXY(event) {
    const rect = canvas.getBoundingClientRect();
    return [(event.clientX - rect.left) * canvas.width / rect.width,
            (event.clientY - rect.top) * canvas.height / rect.height];
  }

  function nearest(x, y) {
    const p = data.points;
    let best = -1, bestD = TOUCH_PX * TOUCH_PX * (canvas.width / canvas.getBoundingClientRect().width || 1);
    for (let i = 0; i < p.length; i += 3) {
      const xy = toPx(p[i], p[i + 1]);
      const d = (xy[0] - x) * (xy[0] - x) + (xy[1] - y) * (xy[1] - y);
      if (d < bestD) { bestD = d; best = i / 3; }
    }
    return best;
  }

  function showPicked(index) {
    if (index < 0) { picked.textContent = "No pile there."; return; }
    const mark = data.marks[index];
    const state = data.states[data.points[index * 3 + 2]];
    picked.textContent = "";
    const link = document.createElement("a");
    link.href = section.dataset.list + "?q=" + encodeURIComponent(mark);
    link.textContent = mark;
    picked.append("Pile ", link, ": " + state + ".");
  }

  let start = null;
  canvas.addEventListener("pointerdown", (event) => {
    if (!data) return;
    start = { xy: canvasXY(event), view: Object.assign({}, view) };
    canvas.setPointerCapture(event.pointerId);
  });
  canvas.addEventListener("pointermove", (event) => {
    if (!start) return;
    const xy = canvasXY(event);
    if (panMode) {
      view.e = start.view.e - (xy[0] - start.xy[0]) / view.scale;
      view.n = start.view.n + (xy[1] - start.xy[1]) / view.scale;
      draw();
    } else {
      draw([Math.min(start.xy[0], xy[0]), Math.min(start.xy[1], xy[1]),
            Math.max(start.xy[0], xy[0]), Math.max(start.xy[1], xy[1])]);
    }
  });
  canvas.addEventListener("pointerup", (event) => {
    if (!start) return;
    const xy = canvasXY(event);
    const moved = Math.abs(xy[0] - start.xy[0]) + Math.abs(xy[1] - start.xy[1]);
    const from = start.xy;
    start = null;
    if (moved < 8) { draw(); showPicked(nearest(xy[0], xy[1])); return; }
    if (panMode) return;
    const a = toPlan(from[0], from[1]), b = toPlan(xy[0], xy[1]);
    const bbox = [Math.min(a[0], b[0]), Math.min(a[1], b[1]), Math.max(a[0], b[0]), Math.max(a[1], b[1])]
      .map((v) => v.toFixed(1)).join(",");
    const field = document.getElementById("bbox");
    if (field) {
      field.value = bbox;
      picked.textContent = "Area chosen: " + bbox.replace(/,/g, ", ") + " m. Press Filter to list its piles.";
    }
  });

  section.querySelectorAll("[data-zoom]").forEach((button) => {
    button.addEventListener("click", () => {
      if (!data) return;
      if (button.dataset.zoom === "all") { fitAll(); draw(); return; }
      const factor = button.dataset.zoom === "in" ? 2 : 0.5;
      const centre = toPlan(canvas.width / 2, canvas.height / 2);
      view.scale *= factor;
      view.e = centre[0] - canvas.width / 2 / view.scale;
      view.n = centre[1] + canvas.height / 2 / view.scale;
      draw();
    });
  });
  const panButton = section.querySelector("[data-mode=pan]");
  panButton.addEventListener("click", () => {
    panMode = !panMode;
    panButton.setAttribute("aria-pressed", panMode ? "true" : "false");
  });

  fetch(section.dataset.plan, { credentials: "same-origin", headers: { Accept: "application/json" } })
    .then((r) => (r.ok ? r.json() : null))
    .then((body) => {
      if (!body) return;
      data = body;
      fitAll();
      draw();
      section.dataset.drawn = String(body.marks.length);
    })
    .catch(() => { picked.textContent = "The plan could not be loaded (no signal?); the table below lists the piles."; });
})();

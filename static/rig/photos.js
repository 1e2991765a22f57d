// Toeline, At the rig: photos of the pile (static/rig/photos.js).
//
// A photo (kind, caption, the original file) goes through window.ToelineOutbox (stored on the
// tablet first, then sent) when it is there, else straight to the API; its thumbnail is shown
// at once, marked "waiting to be sent" while it waits on the tablet.
// window.ToelineRigPhotos.start({data, newId, csrf}) with functions from static/rig.js.

(function () {
  "use strict";
  const byId = (id) => document.getElementById(id);
  let page = null;

  function addThumb(src, kind, caption, note) {
    const li = document.createElement("li");
    li.className = "photo";
    const img = document.createElement("img");
    img.src = src;
    img.alt = kind + ": " + caption;
    const span = document.createElement("span");
    span.className = "photo-cap";
    const b = document.createElement("b");
    b.textContent = kind;
    span.append(b, document.createTextNode(" " + caption + (note ? " (" + note + ")" : "")));
    li.append(img, span);
    byId("photo-list").prepend(li);
    return li;
  }

  async function uploadPhoto(event) {
    event.preventDefault();
    const file = byId("photo-file").files[0];
    const err = byId("photo-error");
    err.textContent = "";
    if (!file) { err.textContent = "Choose a photo first."; return; }
    const kind = byId("photo-kind").value, caption = byId("photo-caption").value.trim();
    const button = byId("photo-upload");
    button.disabled = true;
    try {
      let answer;
      if (window.ToelineOutbox) {
        answer = await window.ToelineOutbox.savePhoto(page.data().project_id, page.data().mark, file, { kind: kind, caption: caption });
      } else {
        const fd = new FormData();
        fd.append("file", file);
        fd.append("client_id", page.newId());
        fd.append("kind", kind);
        fd.append("caption", caption);
        const r = await fetch(page.data().urls.photos, { method: "POST", credentials: "same-origin",
                                                  headers: { "X-CSRFToken": page.csrf() }, body: fd });
        let body = null;
        try { body = await r.json(); } catch (e) { body = null; }
        answer = { ok: r.ok, status: r.status, body: body, queued: false };
      }
      if (answer.queued) {
        addThumb(URL.createObjectURL(file), kind, caption, "waiting to be sent");
      } else if (answer.ok) {
        addThumb(answer.body.thumb_url, kind, caption, "");
        byId("photo-file").value = "";
        byId("photo-caption").value = "";
      } else {
        const body = answer.body || {};
        err.textContent = "Photo not added: " + (body.errors ? Object.values(body.errors).join("; ") : (body.error || answer.status));
      }
    } catch (e) {
      err.textContent = "Photo not added: " + (e && e.message ? e.message : e);
    } finally {
      button.disabled = false;
    }
  }

  function start(hooks) {
    page = hooks;
    const photoForm = byId("photo-form");
    if (photoForm) photoForm.addEventListener("submit", uploadPhoto);
  }

  window.ToelineRigPhotos = { start: start, addThumb: addThumb };
})();

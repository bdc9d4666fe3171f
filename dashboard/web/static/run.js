// liftyard run page: the marks set by hand (steady segments chosen by the
// operator). Reads GET /api/v1/runs/{id}/marks; adds, removes, clears and
// applies marks with same-origin JSON POSTs. Every check is repeated on the
// server, which answers 400 with the field to fix.
"use strict";
(function () {
  const sec = document.getElementById("marks");
  if (!sec) return;
  const run = sec.dataset.run;
  const base = "/api/v1/runs/" + encodeURIComponent(run) + "/marks";
  const $ = (id) => document.getElementById(id);
  const form = $("mark-form");
  const table = $("marks-table");
  const msg = $("marks-msg");

  function say(text, isError) {
    msg.textContent = text;
    msg.className = isError ? "error" : "";
  }
  function fix(v) { return typeof v === "number" && isFinite(v) ? v.toFixed(3) : "—"; }
  function cell(tr, text, cls) {
    const td = document.createElement("td");
    td.textContent = text;
    if (cls) td.className = cls;
    tr.appendChild(td);
    return td;
  }

  function show(data) {
    const tb = table.tBodies[0];
    while (tb.firstChild) tb.removeChild(tb.firstChild);
    for (const m of data.marks) {
      const tr = document.createElement("tr");
      cell(tr, String(m.n));
      cell(tr, fix(m.start_s), "num");
      cell(tr, fix(m.end_s), "num");
      cell(tr, typeof m.start_s === "number" ? fix(m.end_s - m.start_s) : "—", "num");
      cell(tr, m.label || "");
      const td = cell(tr, "");
      if (data.editable) {
        const b = document.createElement("button");
        b.type = "button";
        b.textContent = "Remove";
        b.addEventListener("click", () => post(base + "/" + m.n + "/delete", null, "Mark " + m.n + " removed; apply to update the segments."));
        td.appendChild(b);
      }
      tb.appendChild(tr);
    }
    table.hidden = data.marks.length === 0;
    let status = data.marks.length === 0 ? "No marks: the segments come from the automatic steady test."
      : data.marks.length + " mark(s).";
    if (!data.editable && data.reason) status += " " + data.reason + ".";
    $("marks-status").textContent = status;
    form.hidden = !data.editable;
  }

  async function post(url, body, done) {
    const opts = { method: "POST", credentials: "same-origin", headers: {} };
    if (body !== null) {
      opts.headers["Content-Type"] = "application/json";
      opts.body = JSON.stringify(body);
    }
    say("Working…", false);
    try {
      const res = await fetch(url, opts);
      const data = await res.json();
      if (!res.ok) {
        say(data.error || ("HTTP " + res.status), true);
        return;
      }
      show(data);
      if (data.applied) {
        let t = data.applied.segments + " segment(s) stored. " + (data.applied.note || "");
        if (data.applied.unused.length) t += " Marks without samples: " + data.applied.unused.join(", ") + ".";
        say(t + " Reloading…", false);
        setTimeout(() => window.location.reload(), 800);
        return;
      }
      say(done, false);
    } catch (e) {
      say("Request failed: " + e, true);
    }
  }

  form.addEventListener("submit", (ev) => {
    ev.preventDefault();
    const f = new FormData(form);
    const num = (k) => (f.get(k) === "" ? null : Number(f.get(k)));
    post(base, { start_s: num("start_s"), end_s: num("end_s"), label: String(f.get("label") || "") },
      "Mark added; apply to update the segments.");
  });
  $("marks-apply").addEventListener("click", () => post(base + "/apply", null, ""));
  $("marks-clear").addEventListener("click", () => post(base + "/clear", null, "Marks cleared; apply to go back to the automatic steady test."));

  fetch(base, { credentials: "same-origin" })
    .then((r) => r.json().then((d) => ({ ok: r.ok, d })))
    .then(({ ok, d }) => {
      if (!ok) { $("marks-status").textContent = d.error || "Marks unavailable."; return; }
      show(d);
    })
    .catch((e) => { $("marks-status").textContent = "Marks unavailable: " + e; });
})();

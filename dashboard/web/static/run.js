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

// liftyard run page: the run timeline. Reads GET /api/v1/runs/{id}/timeline
// (q, α and C_L — a rotor's spin ratio, a roof's q only — against seconds
// from the run's first sample, with the segments) and draws it as SVG, one
// panel per quantity on a shared time axis, the segments shaded. Dragging
// across it (or clicking a start, then an end) selects a stretch of time;
// where marks can be edited the selection fills the mark form's start and
// end. The page's own code: three line panels need no chart library.
(function () {
  const sec = document.getElementById("timeline");
  if (!sec) return;
  const NS = "http://www.w3.org/2000/svg";
  const run = sec.dataset.run;
  const box = document.getElementById("timeline-plot");
  const status = document.getElementById("timeline-status");
  const PAD_L = 64, PAD_R = 14, PANEL_H = 96, GAP = 10, AXIS_H = 34;
  let data = null, geo = null, sel = null, pending = null;

  function el(name, attrs, parent) {
    const e = document.createElementNS(NS, name);
    for (const k in attrs) e.setAttribute(k, attrs[k]);
    if (parent) parent.appendChild(e);
    return e;
  }
  // ticks returns about n round values (1, 2, 5 × 10^k steps) across lo…hi.
  function ticks(lo, hi, n) {
    const span = hi - lo;
    if (!(span > 0)) return [lo];
    const raw = span / n, p = Math.pow(10, Math.floor(Math.log10(raw)));
    const step = [1, 2, 5, 10].map((m) => m * p).find((s) => s >= raw);
    const out = [];
    for (let v = Math.ceil(lo / step) * step; v <= hi + step * 1e-9; v += step) out.push(Math.abs(v) < step * 1e-9 ? 0 : v);
    return out;
  }
  function label(text, unit, parent, x, y) {
    const t = el("text", { x: x, y: y, class: "tl-label" }, parent);
    if (text === "C_L") {
      t.appendChild(document.createTextNode("C"));
      el("tspan", { "baseline-shift": "sub", "font-size": "75%" }, t).textContent = "L";
    } else {
      t.textContent = text;
    }
    if (unit) el("tspan", { class: "tl-unit" }, t).textContent = " [" + unit + "]";
    return t;
  }
  // range is the finite values' span with a little room; a flat series
  // gets a band of ±5 % (or ±1) so its line sits in the middle.
  function range(vs) {
    let lo = Infinity, hi = -Infinity;
    for (const v of vs) if (typeof v === "number" && isFinite(v)) { lo = Math.min(lo, v); hi = Math.max(hi, v); }
    if (lo === Infinity) return null;
    if (hi - lo < 1e-12) { const d = Math.abs(lo) * 0.05 || 1; return [lo - d, hi + d]; }
    const pad = (hi - lo) * 0.08;
    return [lo - pad, hi + pad];
  }

  function draw() {
    if (!data) return;
    while (box.firstChild) box.removeChild(box.firstChild);
    const W = Math.max(300, Math.floor(box.clientWidth));
    const n = data.series.length;
    const H = n * PANEL_H + (n - 1) * GAP + AXIS_H;
    const svg = el("svg", { width: W, height: H, viewBox: "0 0 " + W + " " + H, role: "img", class: "tl-svg",
      "aria-label": "Run " + data.run + " against time with its steady segments shaded" }, box);
    const last = data.t_s.length ? data.t_s[data.t_s.length - 1] + (data.bin_s || 0) / 2 : 1;
    let t1 = last;
    for (const s of data.segments) if (typeof s.end_s === "number") t1 = Math.max(t1, s.end_s);
    const x0 = PAD_L, x1 = W - PAD_R;
    geo = { t0: 0, t1: t1 > 0 ? t1 : 1, x0: x0, x1: x1, svg: svg };
    svg.dataset.t0 = geo.t0; svg.dataset.t1 = geo.t1; svg.dataset.x0 = x0; svg.dataset.x1 = x1;
    const X = (t) => x0 + (t - geo.t0) / (geo.t1 - geo.t0) * (x1 - x0);
    const plotH = H - AXIS_H;
    // Segments, shaded across every panel, numbered at the top.
    const segs = el("g", { class: "tl-segments" }, svg);
    for (const s of data.segments) {
      if (typeof s.start_s !== "number" || typeof s.end_s !== "number") continue;
      const a = X(s.start_s), b = X(s.end_s);
      el("rect", { x: a, y: 0, width: Math.max(1, b - a), height: plotH, class: "tl-seg", "data-n": s.n }, segs);
      if (b - a > 12) el("text", { x: (a + b) / 2, y: 10, class: "tl-segn" }, segs).textContent = String(s.n);
    }
    data.series.forEach((s, i) => {
      const top = i * (PANEL_H + GAP), bot = top + PANEL_H;
      const g = el("g", { class: "tl-panel", "data-key": s.key }, svg);
      el("rect", { x: x0, y: top, width: x1 - x0, height: PANEL_H, class: "tl-frame" }, g);
      const r = range(s.values);
      label(s.label, s.unit, g, 4, top + 12);
      if (!r) { el("text", { x: (x0 + x1) / 2, y: top + PANEL_H / 2, class: "tl-none" }, g).textContent = "no values"; return; }
      const Y = (v) => bot - (v - r[0]) / (r[1] - r[0]) * PANEL_H;
      for (const v of ticks(r[0], r[1], 3)) {
        const y = Y(v);
        if (y < top + 14 || y > bot - 2) continue;
        el("line", { x1: x0 - 4, x2: x1, y1: y, y2: y, class: "tl-grid" }, g);
        el("text", { x: x0 - 6, y: y + 4, class: "tl-tick tl-ytick" }, g).textContent = +v.toPrecision(4);
      }
      let d = "", pen = false;
      s.values.forEach((v, j) => {
        if (typeof v !== "number" || !isFinite(v)) { pen = false; return; }
        d += (pen ? "L" : "M") + X(data.t_s[j]).toFixed(1) + " " + Y(v).toFixed(1);
        pen = true;
      });
      el("path", { d: d, class: "tl-line" }, g);
    });
    // Time axis.
    const ax = el("g", { class: "tl-axis" }, svg);
    for (const t of ticks(geo.t0, geo.t1, Math.max(2, Math.floor((x1 - x0) / 90)))) {
      el("line", { x1: X(t), x2: X(t), y1: plotH, y2: plotH + 5, class: "tl-grid" }, ax);
      el("text", { x: X(t), y: plotH + 18, class: "tl-tick tl-xtick" }, ax).textContent = +t.toPrecision(6);
    }
    el("text", { x: x1, y: H - 2, class: "tl-tick tl-xname" }, ax).textContent = "time from the run's first sample [s]";
    // The selection and the surface that takes the pointer.
    geo.sel = el("rect", { x: 0, y: 0, width: 0, height: plotH, class: "tl-sel", visibility: "hidden" }, svg);
    const hit = el("rect", { x: x0, y: 0, width: x1 - x0, height: plotH, class: "tl-hit" }, svg);
    hit.addEventListener("pointerdown", down);
    if (sel) show(sel[0], sel[1]);
  }

  const clampT = (t) => Math.min(geo.t1, Math.max(geo.t0, t));
  function tOf(ev) {
    const r = geo.svg.getBoundingClientRect();
    const x = ev.clientX - r.left;
    return clampT(geo.t0 + (x - geo.x0) / (geo.x1 - geo.x0) * (geo.t1 - geo.t0));
  }
  function show(a, b) {
    const X = (t) => geo.x0 + (t - geo.t0) / (geo.t1 - geo.t0) * (geo.x1 - geo.x0);
    geo.sel.setAttribute("x", X(Math.min(a, b)));
    geo.sel.setAttribute("width", Math.max(1, Math.abs(X(b) - X(a))));
    geo.sel.setAttribute("visibility", "visible");
  }
  function choose(a, b) {
    const lo = Math.min(a, b), hi = Math.max(a, b);
    sel = [lo, hi];
    show(lo, hi);
    const form = document.getElementById("mark-form");
    const text = "Selected " + lo.toFixed(3) + " s to " + hi.toFixed(3) + " s (" + (hi - lo).toFixed(3) + " s).";
    if (form && !form.hidden) {
      form.elements.start_s.value = lo.toFixed(3);
      form.elements.end_s.value = hi.toFixed(3);
      status.textContent = text + " The mark form below holds it: add a label and press Add mark.";
    } else {
      status.textContent = text;
    }
  }
  function down(ev) {
    ev.preventDefault();
    const hit = ev.currentTarget;
    const a = tOf(ev), xa = ev.clientX;
    hit.setPointerCapture(ev.pointerId);
    const move = (e) => show(a, tOf(e));
    const up = (e) => {
      hit.removeEventListener("pointermove", move);
      hit.removeEventListener("pointerup", up);
      if (Math.abs(e.clientX - xa) > 3) { pending = null; choose(a, tOf(e)); return; }
      // A click: the first sets the start, the second the end.
      if (pending === null) {
        pending = a;
        show(a, a);
        status.textContent = "Start at " + a.toFixed(3) + " s: click the end.";
      } else {
        const b = pending;
        pending = null;
        if (b !== a) choose(b, a);
      }
    };
    hit.addEventListener("pointermove", move);
    hit.addEventListener("pointerup", up);
  }

  fetch("/api/v1/runs/" + encodeURIComponent(run) + "/timeline?points=2000", { credentials: "same-origin" })
    .then((r) => r.json().then((d) => ({ ok: r.ok, d })))
    .then(({ ok, d }) => {
      if (!ok) { status.textContent = d.error || "Timeline unavailable."; return; }
      data = d;
      if (!d.t_s.length) { status.textContent = "No samples to plot."; return; }
      const form = document.getElementById("mark-form");
      status.textContent = (form && !form.hidden)
        ? "Drag across the plot (or click a start, then an end) to fill a mark's start and end."
        : "Drag across the plot to read a stretch's start and end.";
      draw();
      let w = box.clientWidth;
      window.addEventListener("resize", () => { if (box.clientWidth !== w) { w = box.clientWidth; draw(); } });
    })
    .catch((e) => { status.textContent = "Timeline unavailable: " + e; });
})();

// liftyard live page: one EventSource carries the events "run", "health",
// "live" and "segment". This script only formats and draws; every number
// arrives computed (angles in degrees, uncertainties as U95).
"use strict";
(function () {
  const TREND_SPAN_MS = 60000;
  const $ = (id) => document.getElementById(id);

  function finite(v) { return typeof v === "number" && isFinite(v); }
  function fix(v, d) { return finite(v) ? v.toFixed(d) : "—"; }
  // Decimals that show u with two significant digits (JCGM 100:2008 §7.2.6),
  // never fewer than d; the same rule as the server's pages.
  function uDigits(u, d) {
    if (!finite(u) || u === 0) return d;
    return Math.min(Math.max(Math.ceil(-Math.log10(Math.abs(u))) + 1, d), 8);
  }
  function ufix(u, d) { return finite(u) ? u.toFixed(uDigits(u, d)) : "—"; }
  function pm(v, u, d) {
    if (!finite(v)) return "—";
    if (!finite(u)) return v.toFixed(d);
    const k = uDigits(u, d);
    return v.toFixed(k) + " ± " + u.toFixed(k);
  }
  const SUP = { "0": "⁰", "1": "¹", "2": "²", "3": "³", "4": "⁴", "5": "⁵", "6": "⁶", "7": "⁷", "8": "⁸", "9": "⁹", "-": "⁻" };
  function sci(v) {
    if (!finite(v)) return "—";
    if (v === 0) return "0";
    let e = Math.floor(Math.log10(Math.abs(v)));
    if (e >= -2 && e < 4) return String(Number(v.toPrecision(3)));
    let m = v / Math.pow(10, e);
    if (Math.abs(m) >= 9.995) { m /= 10; e++; }
    return m.toFixed(2) + "×10" + String(e).split("").map((c) => SUP[c]).join("");
  }
  function rho(v) { return finite(v) ? v.toFixed(v >= 100 ? 1 : 3) : "—"; }
  function set(id, text) { const el = $(id); if (el && el.textContent !== text) el.textContent = text; }

  // Trend buffers: {t: ms, v: number|null}, newest last.
  const trends = {
    q: { canvas: $("trend-q"), pts: [], digits: 1 },
    cl: { canvas: $("trend-cl"), pts: [], digits: 3 },
  };
  let runID = null;
  const segRows = new Map(); // segment index -> <tr>

  function resetRun() {
    for (const k in trends) { trends[k].pts = []; draw(trends[k]); }
    segRows.clear();
    for (const id of ["segments", "roof-blocks", "zones"]) {
      const tb = $(id).tBodies[0];
      while (tb.firstChild) tb.removeChild(tb.firstChild);
    }
    $("no-segments").hidden = false;
  }

  // setLayout shows the parts of the page for the run's rig kind: the
  // server maps each kind to a layout (data-layouts, dashboard/kinds.go),
  // which is the class of #live that style.css reads.
  const layouts = JSON.parse($("live").dataset.layouts || "{}");
  function setLayout(kind) { $("live").className = layouts[kind] || "balance"; }

  function agreesText(a) { return a === true ? "yes" : (a === false ? "no" : "—"); }

  // onZones fills the live zone table (roof rigs).
  function onZones(zs) {
    const tb = $("zones").tBodies[0];
    while (tb.rows.length > zs.length) tb.deleteRow(-1);
    zs.forEach((z, i) => {
      const tr = tb.rows[i] || tb.insertRow();
      while (tr.cells.length < 6) { const td = tr.insertCell(); if (tr.cells.length > 1) td.className = "num"; }
      const cells = [z.zone, pm(z.cp_mean, z.cp_u95, 2), fix(z.cp_min, 2), pm(z.design_cp, z.design_cp_u95, 2),
        fix(z.en, 2), agreesText(z.agrees)];
      cells.forEach((text, k) => { if (tr.cells[k].textContent !== text) tr.cells[k].textContent = text; });
      tr.className = z.agrees === false ? "disagree" : "";
    });
  }

  // onRoofSegment adds one zone-in-a-block row (roof rigs).
  function onRoofSegment(s) {
    if (s.tap) return; // per-tap rows are in the export and the tap map
    const tb = $("roof-blocks").tBodies[0];
    let tr = segRows.get(s.segment);
    if (!tr) {
      tr = document.createElement("tr");
      tr.dataset.segment = String(s.segment);
      for (let i = 0; i < 7; i++) { const td = document.createElement("td"); if (i > 1) td.className = "num"; tr.appendChild(td); }
      segRows.set(s.segment, tr);
      let before = null;
      for (const row of tb.rows) { if (Number(row.dataset.segment) > s.segment) { before = row; break; } }
      tb.insertBefore(tr, before);
    }
    const block = s.block === undefined ? "#" + s.segment : String(s.block + 1);
    const dir = finite(s.direction_deg) ? ", " + fix(s.direction_deg, 0) + (s.sector_left ? " (left its sector)" : "") : "";
    const cells = [block, s.zone, pm(s.cp_mean, s.cp_u95, 2), fix(s.cp_peak, 2),
      pm(s.design_cp, s.design_cp_u95, 2), fix(s.en, 2), pm(s.q_pa, s.q_u95_pa, 1) + dir];
    cells.forEach((text, i) => { tr.cells[i].textContent = text; });
    tr.className = s.agrees === false ? "disagree" : "";
  }

  function onRun(r) {
    if (runID !== null && r.id !== runID) resetRun();
    runID = r.id;
    set("run-id", String(r.id));
    set("run-rig", r.rig);
    set("run-kind", r.kind + ", " + r.fluid);
    set("run-area", fix(r.area_m2, 4) + " m² " + r.area_kind);
    setLayout(r.kind);
  }

  function onLive(l) {
    set("v-q", fix(l.q_pa, 1)); set("u-q", ufix(l.q_u95_pa, 1));
    set("v-speed", fix(l.speed_m_s, 2)); set("u-speed", ufix(l.speed_u95_m_s, 2));
    set("v-alpha", fix(l.alpha_deg, 2)); set("u-alpha", ufix(l.alpha_u95_deg, 2));
    set("v-spin", fix(l.spin_ratio, 3)); set("u-spin", ufix(l.spin_ratio_u95, 3)); set("v-rpm", fix(l.spin_rpm, 0));
    set("v-cl", fix(l.cl, 3)); set("u-cl", ufix(l.cl_u95, 3));
    set("v-cd", fix(l.cd, 3)); set("u-cd", ufix(l.cd_u95, 3));
    set("v-re", sci(l.re));
    set("v-rho", rho(l.rho_kg_m3));
    set("v-n", String(l.n));
    set("v-window", fix(l.window_s, 1));
    set("v-segments", String(l.segments));
    const st = $("v-steady");
    st.textContent = l.steady ? "steady" : "not steady";
    st.className = "state " + (l.steady ? "steady" : "unsteady");

    const ul = $("warnings");
    const ws = l.warnings || [];
    while (ul.children.length > ws.length) ul.removeChild(ul.lastChild);
    ws.forEach((w, i) => {
      let li = ul.children[i];
      if (!li) { li = document.createElement("li"); ul.appendChild(li); }
      if (li.textContent !== w) li.textContent = w;
    });

    let t = Date.parse(l.t);
    if (!isFinite(t)) t = Date.now();
    push(trends.q, t, l.q_pa);
    push(trends.cl, t, l.cl);
    if (l.zones && l.zones.length) onZones(l.zones);
    if (l.zones) set("direction", finite(l.direction_deg) ? fix(l.direction_deg, 0) + "° ± " + fix(l.direction_spread_deg, 0) + "°" : "— (no vane)");
  }

  function push(tr, t, v) {
    const pts = tr.pts;
    if (pts.length && t < pts[pts.length - 1].t) pts.length = 0; // clock went back: new run or device reset
    pts.push({ t: t, v: finite(v) ? v : null });
    while (pts.length && pts[0].t < t - TREND_SPAN_MS) pts.shift();
    draw(tr);
  }

  function draw(tr) {
    const c = tr.canvas;
    if (!c) return;
    const dpr = window.devicePixelRatio || 1;
    const cssW = c.clientWidth || 560, cssH = c.clientHeight || 180;
    if (c.width !== Math.round(cssW * dpr)) { c.width = Math.round(cssW * dpr); c.height = Math.round(cssH * dpr); }
    const g = c.getContext("2d");
    g.setTransform(dpr, 0, 0, dpr, 0, 0);
    g.clearRect(0, 0, cssW, cssH);
    const L = 62, R = 8, T = 8, B = 22, w = cssW - L - R, h = cssH - T - B;
    g.strokeStyle = "#c9cfd4"; g.lineWidth = 1;
    g.strokeRect(L + 0.5, T + 0.5, w, h);
    g.fillStyle = "#55626e"; g.font = "12px system-ui, sans-serif";
    g.beginPath(); g.moveTo(L + w / 2 + 0.5, T); g.lineTo(L + w / 2 + 0.5, T + h); g.stroke();
    g.textAlign = "left"; g.fillText("−60 s", L, cssH - 6);
    g.textAlign = "center"; g.fillText("−30 s", L + w / 2, cssH - 6);
    g.textAlign = "right"; g.fillText("now", L + w, cssH - 6);
    c.dataset.points = String(tr.pts.length);
    const vals = tr.pts.filter((p) => p.v !== null).map((p) => p.v);
    if (!vals.length) { g.textAlign = "center"; g.fillText("waiting for data", L + w / 2, T + h / 2); return; }
    let lo = Math.min.apply(null, vals), hi = Math.max.apply(null, vals);
    if (hi - lo < 1e-9) { const pad = Math.abs(hi) * 0.05 || 0.5; lo -= pad; hi += pad; }
    const span = hi - lo; lo -= span * 0.08; hi += span * 0.08;
    g.textAlign = "right";
    g.fillText(hi.toFixed(tr.digits), L - 4, T + 10);
    g.fillText(lo.toFixed(tr.digits), L - 4, T + h);
    if (lo < 0 && hi > 0) { // zero line
      const y0 = T + h * (hi / (hi - lo));
      g.strokeStyle = "#8a949c"; g.setLineDash([4, 3]);
      g.beginPath(); g.moveTo(L, y0); g.lineTo(L + w, y0); g.stroke(); g.setLineDash([]);
    }
    const tEnd = tr.pts[tr.pts.length - 1].t;
    g.strokeStyle = "#1d3b53"; g.lineWidth = 2; g.beginPath();
    let pen = false;
    for (const p of tr.pts) {
      if (p.v === null) { pen = false; continue; }
      const x = L + w * (1 - (tEnd - p.t) / TREND_SPAN_MS);
      const y = T + h * (hi - p.v) / (hi - lo);
      if (pen) g.lineTo(x, y); else g.moveTo(x, y);
      pen = true;
    }
    g.stroke();
  }

  function onSegment(s) {
    if (runID !== null && s.run !== runID) return;
    if (typeof s.zone === "string") {
      onRoofSegment(s);
      set("v-segments", String(Math.max(Number($("v-segments").textContent) || 0, segRows.size)));
      return;
    }
    let tr = segRows.get(s.segment);
    if (!tr) {
      tr = document.createElement("tr");
      tr.dataset.segment = String(s.segment);
      for (let i = 0; i < 6; i++) { const td = document.createElement("td"); if (i > 0) td.className = "num"; tr.appendChild(td); }
      segRows.set(s.segment, tr);
      const tb = $("segments").tBodies[0];
      let before = null; // keep rows ordered by segment index
      for (const row of tb.rows) { if (Number(row.dataset.segment) > s.segment) { before = row; break; } }
      tb.insertBefore(tr, before);
    }
    const cells = [String(s.segment), pm(s.alpha_deg, s.alpha_u95_deg, 2), pm(s.cl, s.cl_u95, 3), pm(s.cd, s.cd_u95, 3), pm(s.q_pa, s.q_u95_pa, 1), fix(s.n_eff, 0)];
    cells.forEach((text, i) => { tr.cells[i].textContent = text; });
    $("no-segments").hidden = true;
    set("v-segments", String(Math.max(Number($("v-segments").textContent) || 0, segRows.size)));
  }

  function onHealth(h) {
    const list = h.sources || [];
    const el = $("health");
    if (!list.length) { el.textContent = "No sources reporting."; el.className = "health muted"; }
    else {
      let bad = false;
      el.textContent = list.map((s) => {
        const dropped = (s.blocks_dropped || 0) + " blocks + " + (s.samples_dropped || 0) + " samples dropped";
        if (s.rejected || s.samples_dropped || s.blocks_dropped || s.gaps) bad = true;
        // The "store" line is the recorder → store queue: only drops apply.
        if (s.name === "store") return "store queue: " + dropped;
        return s.name + ": " + s.frames + " blocks, " + s.rejected + " rejected, " + dropped + ", " +
          s.gaps + " gaps, " + s.reconnects + " reconnects";
      }).join(" · ");
      el.className = "health" + (bad ? " bad" : "");
    }
    onChannels(h.channels || [], h.loads || []);
  }

  // onChannels fills the channel table and the load alarm banner.
  function onChannels(chans, loads) {
    const load = {};
    loads.forEach((l) => { load[l.channel] = l; });
    const tb = $("channels").tBodies[0];
    while (tb.rows.length > chans.length) tb.deleteRow(-1);
    chans.forEach((c, i) => {
      const tr = tb.rows[i] || tb.insertRow();
      while (tr.cells.length < 8) tr.insertCell();
      const l = load[c.channel];
      let state = c.stale ? "stale" : (c.saturated ? "saturated" : "ok");
      if (l && l.state !== "ok") state = l.state === "alarm" ? "OVERLOAD" : "near capacity";
      const cells = [c.channel, c.source, fix(c.rate_hz, 0), String(c.missing), String(c.saturated),
        l ? fix(100 * l.peak_frac, 0) + " %" : "—", l ? fix(100 * l.max_frac, 0) + " %" : "—", state];
      cells.forEach((text, k) => { if (tr.cells[k].textContent !== text) tr.cells[k].textContent = text; });
      tr.className = state === "OVERLOAD" ? "alarm" : (state === "ok" ? "" : "warn");
    });
    const ul = $("load-alarms");
    const lines = loads.filter((l) => l.state !== "ok").map((l) =>
      (l.state === "alarm" ? "OVERLOAD: " : "Near capacity: ") + l.channel + " at " + fix(100 * l.peak_frac, 0) +
      " % of its rated " + fix(l.capacity_si, 0) + " " + l.unit + (l.state === "alarm" ? ": unload the rig" : ""));
    while (ul.children.length > lines.length) ul.removeChild(ul.lastChild);
    lines.forEach((text, i) => {
      const li = ul.children[i] || ul.appendChild(document.createElement("li"));
      if (li.textContent !== text) li.textContent = text;
    });
  }

  function handler(fn) {
    return (ev) => {
      let v;
      try { v = JSON.parse(ev.data); } catch (e) { console.warn("liftyard: bad event", ev.type, e); return; }
      fn(v);
    };
  }

  for (const k in trends) draw(trends[k]);
  const es = new EventSource("/api/v1/stream");
  es.addEventListener("run", handler(onRun));
  es.addEventListener("live", handler(onLive));
  es.addEventListener("segment", handler(onSegment));
  es.addEventListener("health", handler(onHealth));
  es.onopen = () => { const c = $("conn"); c.textContent = "connected"; c.className = "conn ok"; };
  es.onerror = () => { const c = $("conn"); c.textContent = "reconnecting…"; c.className = "conn lost"; };
})();

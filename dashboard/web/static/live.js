// liftyard live page: one EventSource carries the events "run", "history",
// "health", "live" and "segment". This script only formats and draws; every
// number arrives computed (angles in degrees, uncertainties as U95).
// Two indicators are kept apart: the browser's link to the server (#conn)
// and the freshness of the data (#fresh, from the server's data-age clock).
"use strict";
(function () {
  const TREND_SPAN_MS = 120000;
  // No live event for this long while the link is up: the recorder itself
  // has stopped publishing, so the page cannot vouch for the data.
  const NO_UPDATE_MS = 3000;
  const $ = (id) => document.getElementById(id);

  function finite(v) { return typeof v === "number" && isFinite(v); }
  // minus writes a typographic minus, as the report and the pages do, and
  // no sign on a number that rounds to zero.
  function minus(s) { return /^-[0.]*$/.test(s) ? s.slice(1) : s.replace(/^-/, "−"); }
  function fix(v, d) { return finite(v) ? minus(v.toFixed(d)) : "—"; }
  // Decimals that show u with two significant digits (JCGM 100:2008 §7.2.6;
  // negative: tens, hundreds); d when u is missing. The value is shown to
  // the same place: the one rounding rule of the report and every page
  // (report.PlusMinus, docs/report.md "Rounding").
  function uDigits(u, d) {
    if (!finite(u) || u === 0) return d;
    let k = 1 - Math.floor(Math.log10(Math.abs(u)));
    if (Math.abs(atPlace(u, k)) >= Math.pow(10, 2 - k)) k--; // 0.0996 → 0.10
    return Math.min(k, 12);
  }
  function atPlace(v, k) { const p = Math.pow(10, k); return Math.round(v * p) / p; }
  function toPlace(v, k) { return minus(k >= 0 ? v.toFixed(k) : atPlace(v, k).toFixed(0)); }
  function ufix(u, d) { return finite(u) ? toPlace(u, uDigits(u, d)) : "—"; }
  function pm(v, u, d) {
    if (!finite(v)) return "—";
    if (!finite(u)) return v.toFixed(d);
    const k = uDigits(u, d);
    return toPlace(v, k) + " ± " + toPlace(u, k);
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

  // Trend buffers: {t: ms, v: number|null, u: U95|null}, newest last;
  // key and ukey name the fields of a live event or history point.
  const trends = {
    q: { canvas: $("trend-q"), pts: [], key: "q_pa", ukey: "q_u95_pa", unit: "Pa" },
    alpha: { canvas: $("trend-alpha"), pts: [], key: "alpha_deg", ukey: "alpha_u95_deg", unit: "°" },
    cl: { canvas: $("trend-cl"), pts: [], key: "cl", ukey: "cl_u95", unit: "" },
  };
  let stale = false;      // the server says a source is silent
  let lastLiveAt = 0;     // browser time of the last live event
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
    set("run-kind", r.kind + ", " + String(r.fluid).replace(/_/g, " ")); // fresh_water → fresh water
    set("run-area", fix(r.area_m2, 4) + " m² " + r.area_kind);
    setLayout(r.kind);
  }

  // onHistory replaces the trends with the server's kept history, so a
  // page opened mid-run starts with full plots.
  function onHistory(pts) {
    for (const k in trends) {
      const tr = trends[k];
      tr.pts = pts.map((p) => ({ t: Date.parse(p.t), v: finite(p[tr.key]) ? p[tr.key] : null, u: finite(p[tr.ukey]) ? p[tr.ukey] : null }))
        .filter((p) => isFinite(p.t));
      draw(tr);
    }
  }

  // Each value is shown with its own decimals: the U95's two significant
  // digits (pm), the same on every screen.
  function tile(id, v, u, d) {
    const k = uDigits(u, d);
    set("v-" + id, finite(v) ? toPlace(v, k) : "—");
    set("u-" + id, finite(u) ? toPlace(u, k) : "—");
  }

  function ageText(s) { return finite(s) ? s.toFixed(s < 10 ? 1 : 0) : "—"; }

  // showFreshness sets the data indicator, the stale banner and the grey
  // tiles from the live event's data-age clock.
  function showFreshness(l) {
    stale = !!l.stale;
    const silent = (l.sources || []).filter((s) => s.stale);
    const banner = $("stale-banner");
    if (silent.length) {
      banner.textContent = "STALE DATA: " + silent.map((s) => "source " + s.source + " silent since " +
        (s.last_block ? new Date(s.last_block).toISOString().slice(11, 21) + " UTC" : "start") + " (" + ageText(s.age_s) + " s)").join("; ") +
        ". The values below are frozen at its last block.";
      banner.hidden = false;
    } else {
      banner.hidden = true;
    }
    $("tiles").classList.toggle("stale", stale);
    const f = $("fresh");
    if (stale) { f.textContent = "STALE (" + silent.map((s) => s.source).join(", ") + ")"; f.className = "fresh stale"; }
    else { f.textContent = "fresh, " + ageText(l.age_s) + " s old"; f.className = "fresh"; }
    set("v-age", ageText(l.age_s));
  }

  // A link that is up but carries no live event says nothing about the
  // data: the page says so rather than showing the last numbers as fresh.
  setInterval(() => {
    if (!lastLiveAt || Date.now() - lastLiveAt < NO_UPDATE_MS) return;
    const f = $("fresh");
    f.textContent = "no update for " + Math.round((Date.now() - lastLiveAt) / 1000) + " s";
    f.className = "fresh stale";
    $("tiles").classList.add("stale");
  }, 1000);

  function onLive(l) {
    lastLiveAt = Date.now();
    tile("q", l.q_pa, l.q_u95_pa, 1);
    tile("speed", l.speed_m_s, l.speed_u95_m_s, 2);
    tile("alpha", l.alpha_deg, l.alpha_u95_deg, 2);
    tile("spin", l.spin_ratio, l.spin_ratio_u95, 3); set("v-rpm", fix(l.spin_rpm, 0));
    tile("cl", l.cl, l.cl_u95, 3);
    tile("cd", l.cd, l.cd_u95, 3);
    tile("lift", l.lift_n, l.lift_u95_n, 1);
    tile("drag", l.drag_n, l.drag_u95_n, 1);
    const note = $("cl-note");
    if (l.withheld) { note.textContent = "not shown: " + l.withheld; }
    else if (!note.querySelector("#u-cl")) { note.textContent = "U95 ± "; const sp = document.createElement("span"); sp.id = "u-cl"; note.appendChild(sp); tile("cl", l.cl, l.cl_u95, 3); }
    set("v-temp", fix(l.temperature_c, 1));
    set("temp-src", l.temperature_measured ? "measured" : "rig file (not measured)");
    showFreshness(l);
    set("v-re", sci(l.re));
    set("v-rho", rho(l.rho_kg_m3));
    set("v-n", String(l.n));
    set("v-window", fix(l.window_s, 1));
    set("v-segments", String(l.segments));
    set("v-blocks", String(l.segments)); // a roof counts its result blocks
    const st = $("v-steady");
    st.textContent = l.steady ? "steady" : (l.flow_off ? "flow off" : "not steady");
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
    for (const k in trends) push(trends[k], t, l[trends[k].key], l[trends[k].ukey]);
    if (l.zones && l.zones.length) onZones(l.zones);
    if (l.zones) set("direction", finite(l.direction_deg) ? fix(l.direction_deg, 0) + "° ± " + fix(l.direction_spread_deg, 0) + "°" : "— (no vane)");
  }

  function push(tr, t, v, u) {
    const pts = tr.pts;
    if (pts.length && t === pts[pts.length - 1].t) { draw(tr); return; } // republished: the data did not move
    if (pts.length && t < pts[pts.length - 1].t) pts.length = 0; // clock went back: new run or device reset
    pts.push({ t: t, v: finite(v) ? v : null, u: finite(u) ? u : null });
    while (pts.length && pts[0].t < t - TREND_SPAN_MS) pts.shift();
    draw(tr);
  }

  // niceStep is the 1-2-5 step that cuts span into about n intervals.
  function niceStep(span, n) {
    const raw = span / n, p = Math.pow(10, Math.floor(Math.log10(raw)));
    const m = raw / p;
    return (m <= 1 ? 1 : m <= 2 ? 2 : m <= 5 ? 5 : 10) * p;
  }

  // yRange is the plotted range: the data with their U95 band, never
  // narrower than ± the median U95 around the data's middle, so that noise
  // inside the uncertainty never fills the plot.
  function yRange(pts) {
    let lo = Infinity, hi = -Infinity;
    const us = [];
    for (const p of pts) {
      if (p.v === null) continue;
      const u = p.u === null ? 0 : p.u;
      lo = Math.min(lo, p.v - u); hi = Math.max(hi, p.v + u);
      if (p.u !== null) us.push(p.u);
    }
    us.sort((a, b) => a - b);
    const uMed = us.length ? us[Math.floor(us.length / 2)] : 0;
    const mid = (lo + hi) / 2;
    let half = Math.max((hi - lo) / 2, 2 * uMed, Math.abs(mid) * 1e-3, 1e-9);
    half *= 1.1;
    return [mid - half, mid + half];
  }

  function draw(tr) {
    const c = tr.canvas;
    if (!c) return;
    const dpr = window.devicePixelRatio || 1;
    const cssW = c.clientWidth || 560, cssH = c.clientHeight || 200;
    if (c.width !== Math.round(cssW * dpr) || c.height !== Math.round(cssH * dpr)) {
      c.width = Math.round(cssW * dpr); c.height = Math.round(cssH * dpr);
    }
    const g = c.getContext("2d");
    g.setTransform(dpr, 0, 0, dpr, 0, 0);
    g.clearRect(0, 0, cssW, cssH);
    const L = 64, R = 10, T = 8, B = 24, w = cssW - L - R, h = cssH - T - B;
    g.strokeStyle = "#c9cfd4"; g.lineWidth = 1;
    g.strokeRect(L + 0.5, T + 0.5, w, h);
    g.fillStyle = "#55626e"; g.font = "12px system-ui, sans-serif";
    // Time ticks every 30 s back from the newest point.
    g.textAlign = "center";
    for (let s = 0; s <= TREND_SPAN_MS / 1000; s += 30) {
      const x = L + w * (1 - s * 1000 / TREND_SPAN_MS);
      g.beginPath(); g.moveTo(x + 0.5, T + h); g.lineTo(x + 0.5, T + h + 4); g.stroke();
      g.fillText(s === 0 ? "now" : "−" + s + " s", Math.min(Math.max(x, L + 16), L + w - 14), cssH - 6);
    }
    c.dataset.points = String(tr.pts.length);
    const vals = tr.pts.filter((p) => p.v !== null);
    if (!vals.length) {
      g.textAlign = "center";
      g.fillText(tr.pts.length ? "not shown (flow off or not yet steady)" : "waiting for data", L + w / 2, T + h / 2);
      return;
    }
    const [lo, hi] = yRange(vals);
    c.dataset.spanS = String((vals[vals.length - 1].t - vals[0].t) / 1000);
    c.dataset.ylo = String(lo); c.dataset.yhi = String(hi);
    const Y = (v) => T + h * (hi - v) / (hi - lo);
    const step = niceStep(hi - lo, 4);
    const dec = Math.max(0, -Math.floor(Math.log10(step) + 1e-9));
    g.textAlign = "right"; g.textBaseline = "middle";
    for (let v = Math.ceil(lo / step) * step; v <= hi + step * 1e-6; v += step) {
      const y = Math.round(Y(v)) + 0.5;
      g.strokeStyle = "#eceff1"; g.beginPath(); g.moveTo(L + 1, y); g.lineTo(L + w, y); g.stroke();
      g.fillText((Math.abs(v) < step / 2 ? 0 : v).toFixed(dec) + (tr.unit ? " " + tr.unit : ""), L - 4, y);
    }
    g.textBaseline = "alphabetic";
    const tEnd = tr.pts[tr.pts.length - 1].t;
    const X = (t) => L + w * (1 - (tEnd - t) / TREND_SPAN_MS);
    // U95 band, then the line; grey while the data are stale.
    g.fillStyle = stale ? "rgba(140,148,156,0.25)" : "rgba(29,59,83,0.15)";
    let run = [];
    const flush = () => {
      if (run.length > 1) {
        g.beginPath();
        run.forEach((p, i) => { const x = X(p.t), y = Y(p.v + (p.u || 0)); if (i) g.lineTo(x, y); else g.moveTo(x, y); });
        for (let i = run.length - 1; i >= 0; i--) g.lineTo(X(run[i].t), Y(run[i].v - (run[i].u || 0)));
        g.closePath(); g.fill();
      }
      run = [];
    };
    for (const p of tr.pts) { if (p.v === null) flush(); else run.push(p); }
    flush();
    g.strokeStyle = stale ? "#8a949c" : "#1d3b53"; g.lineWidth = 2; g.beginPath();
    let pen = false;
    for (const p of tr.pts) {
      if (p.v === null) { pen = false; continue; }
      if (pen) g.lineTo(X(p.t), Y(p.v)); else g.moveTo(X(p.t), Y(p.v));
      pen = true;
    }
    g.stroke();
  }
  window.addEventListener("resize", () => { for (const k in trends) draw(trends[k]); });

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
        if (s.name === "store") return "store: " + (s.blocks_dropped || 0) + " blocks (" + (s.samples_dropped || 0) + " sample times) dropped or lost";
        return s.name + ": " + s.frames + " blocks, " + s.rejected + " rejected, " + dropped + ", " +
          s.gaps + " gaps, " + s.reconnects + " reconnects";
      }).join(" · ");
      el.className = "health" + (bad ? " bad" : "");
    }
    // A failing store or a disk running low: said above everything else.
    const sb = $("store-banner");
    const store = h.store || {};
    sb.textContent = store.message || "";
    sb.hidden = !store.message;
    values = {};
    (h.values || []).forEach((v) => { values[v.channel] = v; });
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
      while (tr.cells.length < 9) tr.insertCell();
      tr.cells[2].className = "num";
      const l = load[c.channel];
      const v = values[c.channel];
      let state = c.stale ? "stale" : (c.saturated ? "saturated" : "ok");
      if (l && l.state === "alarm") state = l.now === "alarm" ? "OVERLOAD" : "OVERLOAD (held)";
      else if (l && l.state === "warning") state = "near capacity";
      const cells = [c.channel, c.source, v ? sig(v.value) + " " + v.unit : "—", fix(c.rate_hz, 0), String(c.missing), String(c.saturated),
        l ? fix(100 * l.peak_frac, 0) + " %" : "—", l ? fix(100 * l.max_frac, 0) + " %" : "—", state];
      cells.forEach((text, k) => { if (tr.cells[k].textContent !== text) tr.cells[k].textContent = text; });
      tr.className = state.startsWith("OVERLOAD") ? "alarm" : (state === "near capacity" ? "warn" : (state === "stale" ? "stale" : (state === "ok" ? "" : "warn")));
    });
    // Banner: red for an alarm (held until acknowledged), amber for a
    // warning. Each line is rebuilt only when its text changes, so a click
    // on its button is never lost to a redraw.
    const ul = $("load-alarms");
    const items = loads.filter((l) => l.state !== "ok").map((l) => {
      const alarm = l.state === "alarm";
      let text = (alarm ? "OVERLOAD: " : "Near capacity: ") + l.channel + " at " + fix(100 * l.peak_frac, 0) +
        " % of its rated " + fix(l.capacity_si, 0) + " " + l.unit;
      if (alarm && l.now !== "alarm") text += " (reached " + fix(100 * l.max_frac, 0) + " %; alarm held until acknowledged: inspect the cell)";
      else if (alarm) text += ": unload the rig";
      return { l: l, alarm: alarm, text: text, ack: alarm && l.latched && canAck };
    });
    while (ul.children.length > items.length) ul.removeChild(ul.lastChild);
    items.forEach((it, i) => {
      const li = ul.children[i] || ul.appendChild(document.createElement("li"));
      const key = it.text + "|" + it.ack;
      li.className = it.alarm ? "alarm" : "warn";
      if (li.dataset.key === key) return;
      li.dataset.key = key;
      li.dataset.channel = it.l.channel;
      li.textContent = it.text;
      if (it.ack) {
        const b = document.createElement("button");
        b.type = "button"; b.className = "ack"; b.textContent = "Acknowledge";
        b.addEventListener("click", () => acknowledge(it.l.channel, b));
        li.appendChild(b);
      }
    });
  }

  const canAck = $("live").dataset.ack === "yes";
  let values = {}; // channel -> {value, unit}, from the health event

  // sig shows a channel value with four significant digits.
  function sig(v) { return finite(v) ? String(Number(v.toPrecision(4))) : "—"; }

  // acknowledge releases a held overload alarm; the recorder stores the
  // acknowledgement with the run and publishes the new health.
  function acknowledge(channel, button) {
    button.disabled = true;
    fetch("/api/v1/loads/" + encodeURIComponent(channel) + "/acknowledge", { method: "POST", credentials: "same-origin" })
      .then((r) => { if (!r.ok) { button.disabled = false; console.warn("liftyard: acknowledge", channel, r.status); } })
      .catch(() => { button.disabled = false; });
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
  es.addEventListener("history", handler(onHistory));
  es.addEventListener("live", handler(onLive));
  es.addEventListener("segment", handler(onSegment));
  es.addEventListener("health", handler(onHealth));
  es.onopen = () => { const c = $("conn"); c.textContent = "connected"; c.className = "conn ok"; };
  es.onerror = () => { const c = $("conn"); c.textContent = "reconnecting…"; c.className = "conn lost"; };
})();

// plumbline operator page: draws the network from /api/network once,
// refreshes the state from /api/view every few seconds, and sends alert
// actions to /api/alerts/ with the operator token kept in sessionStorage.
"use strict";
(function () {
  const SVGNS = "http://www.w3.org/2000/svg";
  const REFRESH_MS = 5000;
  const PAD = 24;        // map padding, px (the map fits the bounds inside it)
  const TOP = 5;         // candidates drawn per finding
  const NIGHTS = 15;     // 14 nights and tonight
  const MARK = "#e3127d";
  const QUALITY = {
    "ok": "#2e8b57", "missing": "#b5b5b5", "stale": "#d99a1e", "stuck": "#8663b8",
    "spike": "#e06a1a", "out-of-range": "#b3261e",
  };
  const TOKEN_KEY = "plumbline.token", BY_KEY = "plumbline.by";

  let net = null, view = null, focus = null, lastOK = null, timer = null;
  let nodeAt = new Map(), linkAt = new Map();

  // ---- helpers -------------------------------------------------------
  function el(tag, attrs, text) {
    const e = document.createElement(tag);
    for (const k in attrs || {}) e.setAttribute(k, attrs[k]);
    if (text !== undefined && text !== null) e.textContent = text;
    return e;
  }
  function sv(tag, attrs, parent) {
    const e = document.createElementNS(SVGNS, tag);
    for (const k in attrs || {}) e.setAttribute(k, attrs[k]);
    if (parent) parent.appendChild(e);
    return e;
  }
  function title(node, text) { sv("title", {}, node).textContent = text; }
  function fmt(x, d) { return (x === null || x === undefined || !isFinite(x)) ? "–" : Number(x).toFixed(d === undefined ? 1 : d); }
  function utc(s) {
    if (!s) return "–";
    const d = new Date(s);
    if (isNaN(d)) return "–";
    return d.toISOString().replace("T", " ").slice(0, 16) + " UTC";
  }
  function clock(d) { return d.toISOString().slice(11, 19) + " UTC"; }
  async function getJSON(path) {
    const r = await fetch(path, { cache: "no-store", headers: { "Accept": "application/json" } });
    if (!r.ok) throw new Error(path + ": HTTP " + r.status);
    return r.json();
  }
  function mix(a, b, t) {
    const pa = [1, 3, 5].map(i => parseInt(a.slice(i, i + 2), 16));
    const pb = [1, 3, 5].map(i => parseInt(b.slice(i, i + 2), 16));
    return "#" + pa.map((v, i) => Math.round(v + (pb[i] - v) * t).toString(16).padStart(2, "0")).join("");
  }
  // Diverging scale of the imbalance: lake blue (less water than the model
  // expects) through sand to rust (more: a possible loss).
  function imbalanceColour(x, d) {
    if (x === null || x === undefined || !isFinite(x)) return "#c9c9c9";
    const t = Math.max(-1, Math.min(1, x / d));
    return t < 0 ? mix("#ddd6c4", "#3d7ea6", -t) : mix("#ddd6c4", "#c0502a", t);
  }
  function scaleMax(zones) {
    let m = 0;
    for (const z of zones) if (z.imbalance_lps !== null && isFinite(z.imbalance_lps)) m = Math.max(m, Math.abs(z.imbalance_lps));
    if (m <= 1) return 1;
    const p = Math.pow(10, Math.floor(Math.log10(m)));
    for (const s of [1, 2, 2.5, 5, 10]) if (s * p >= m) return s * p;
    return 10 * p;
  }

  // ---- map geometry --------------------------------------------------
  // The bounds fit inside the SVG box less PAD on every side, centred,
  // north up, one scale for both axes.
  function frame(svg) {
    const W = svg.clientWidth || 800, H = svg.clientHeight || 560, b = net.bounds;
    const dx = Math.max(b.max_x - b.min_x, 1), dy = Math.max(b.max_y - b.min_y, 1);
    const s = Math.min((W - 2 * PAD) / dx, (H - 2 * PAD) / dy);
    const ox = (W - s * dx) / 2, oy = (H - s * dy) / 2;
    return { W, H, px: x => ox + (x - b.min_x) * s, py: y => oy + (b.max_y - y) * s };
  }
  function pointsOf(xy, f) { return xy.map(p => f.px(p[0]).toFixed(1) + "," + f.py(p[1]).toFixed(1)).join(" "); }
  function midpoint(xy, f) {
    const pts = xy.map(p => [f.px(p[0]), f.py(p[1])]);
    let total = 0;
    for (let i = 1; i < pts.length; i++) total += Math.hypot(pts[i][0] - pts[i - 1][0], pts[i][1] - pts[i - 1][1]);
    let half = total / 2;
    for (let i = 1; i < pts.length; i++) {
      const seg = Math.hypot(pts[i][0] - pts[i - 1][0], pts[i][1] - pts[i - 1][1]);
      if (seg >= half && seg > 0) {
        const t = half / seg;
        return [pts[i - 1][0] + (pts[i][0] - pts[i - 1][0]) * t, pts[i - 1][1] + (pts[i][1] - pts[i - 1][1]) * t];
      }
      half -= seg;
    }
    return pts.length ? pts[0] : null;
  }
  function linkWidth(l) {
    if (l.kind !== "pipe") return 2.5;
    const d = l.diameter_mm || 100;
    return Math.max(0.8, Math.min(6, 0.6 + d / 110));
  }
  function sensorPos(s, f) {
    const n = nodeAt.get(s.at);
    if (n && n.x !== null) return [f.px(n.x), f.py(n.y)];
    const l = linkAt.get(s.at);
    if (l && l.xy.length >= 2) return midpoint(l.xy, f);
    return null;
  }

  function drawMap() {
    const svg = document.getElementById("map");
    if (!net) return;
    const f = frame(svg);
    svg.setAttribute("viewBox", "0 0 " + f.W + " " + f.H);
    while (svg.firstChild) svg.removeChild(svg.firstChild);
    const gZones = sv("g", { class: "zones" }, svg);
    const gLinks = sv("g", { class: "links" }, svg);
    const gNodes = sv("g", { class: "nodes" }, svg);
    const gSensors = sv("g", { class: "sensors" }, svg);
    const gLabels = sv("g", { class: "labels" }, svg);
    const gCands = sv("g", { class: "cands" }, svg);
    const zones = view ? view.zones : [];
    const byZone = new Map(zones.map(z => [z.id, z]));
    const d = scaleMax(zones);

    // Zone shading: a wide translucent stroke under every link of the zone.
    const segs = new Map();
    for (const l of net.links) {
      if (!l.zone || l.xy.length < 2) continue;
      if (!segs.has(l.zone)) segs.set(l.zone, []);
      segs.get(l.zone).push("M" + pointsOf(l.xy, f).replace(/ /g, " L"));
    }
    for (const [z, parts] of segs) {
      const zv = byZone.get(z);
      const p = sv("path", { class: "halo", d: parts.join(" "), "data-zone": z,
        stroke: imbalanceColour(zv ? zv.imbalance_lps : null, d), "stroke-width": 16 }, gZones);
      title(p, "zone " + z + (zv ? " · imbalance " + fmt(zv.imbalance_lps) + " L/s" : " · no balance"));
    }
    for (const l of net.links) {
      if (l.xy.length < 2) continue;
      const p = sv("polyline", { class: "link " + l.kind, points: pointsOf(l.xy, f), "data-id": l.id,
        "stroke-width": linkWidth(l).toFixed(2) }, gLinks);
      title(p, l.id + " · " + l.kind + (l.valve ? " (" + l.valve + ")" : "") + (l.diameter_mm ? " · " + l.diameter_mm + " mm" : "") + " · " + l.from + " → " + l.to);
      if (l.kind !== "pipe") {
        const m = midpoint(l.xy, f);
        if (m) {
          const sym = l.kind === "pump"
            ? sv("circle", { cx: m[0], cy: m[1], r: 5, fill: "#1f5f8b", class: "source" }, gNodes)
            : sv("path", { d: `M${m[0] - 5},${m[1] - 4} L${m[0] + 5},${m[1] + 4} L${m[0] + 5},${m[1] - 4} L${m[0] - 5},${m[1] + 4} Z`, fill: "#6d4a8c", class: "source" }, gNodes);
          title(sym, l.id + " · " + l.kind);
        }
      }
    }
    for (const n of net.nodes) {
      if (n.x === null) continue;
      const x = f.px(n.x), y = f.py(n.y);
      let e;
      if (n.kind === "junction") e = sv("circle", { class: "junction", cx: x, cy: y, r: 1.3 }, gNodes);
      else if (n.kind === "reservoir") e = sv("rect", { class: "source", x: x - 7, y: y - 5, width: 14, height: 10, fill: "#3d7ea6" }, gNodes);
      else e = sv("path", { class: "source", d: `M${x - 6},${y + 6} L${x - 6},${y - 3} L${x},${y - 8} L${x + 6},${y - 3} L${x + 6},${y + 6} Z`, fill: "#8fb9cf" }, gNodes);
      title(e, n.id + " · " + n.kind + (n.zone ? " · zone " + n.zone : ""));
    }
    for (const z of net.zones) {
      const t = sv("text", { class: "zone-label", x: f.px((z.min_x + z.max_x) / 2), y: Math.max(14, f.py(z.max_y) - 12), "text-anchor": "middle" }, gLabels);
      t.textContent = z.id;
    }
    if (!view) return;
    for (const s of view.sensors) {
      const pos = sensorPos(s, f);
      if (!pos) continue;
      const [x, y] = pos, c = QUALITY[s.quality] || "#555";
      let e;
      const a = { class: "sensor", "data-id": s.id, "data-quality": s.quality, fill: c };
      if (s.quantity === "flow") e = sv("path", Object.assign(a, { d: `M${x},${y - 7} L${x + 6},${y + 4} L${x - 6},${y + 4} Z` }), gSensors);
      else if (s.quantity === "level") e = sv("rect", Object.assign(a, { x: x - 5, y: y - 5, width: 10, height: 10 }), gSensors);
      else e = sv("path", Object.assign(a, { d: `M${x},${y - 6} L${x + 6},${y} L${x},${y + 6} L${x - 6},${y} Z` }), gSensors);
      if (s.quality === "missing") e.setAttribute("fill", "#faf8f2"), e.setAttribute("stroke", "#8a8a8a");
      title(e, s.id + " · " + s.quantity + " at " + s.at + " · " + s.quality + " · " + fmt(s.value, 2) + " " + s.unit +
        " (expected " + fmt(s.expected, 2) + ", residual " + fmt(s.residual, 2) + ")");
    }
    const sensorByID = new Map(view.sensors.map(s => [s.id, s]));
    sortedFindings().forEach(({ f: fd, key }) => {
      const cands = (fd.candidates || []).slice(0, TOP);
      // Draw the worst rank first so rank 1 ends on top.
      for (let i = cands.length - 1; i >= 0; i--) {
        const c = cands[i], rank = i + 1;
        const g = sv("g", { class: "cand " + fd.kind, "data-rank": rank, "data-id": c.id, "data-finding": key }, null);
        let pos = null;
        if (fd.kind === "blockage") {
          const l = linkAt.get(c.id);
          if (l && l.xy.length >= 2) {
            sv("polyline", { class: "trace", points: pointsOf(l.xy, f) }, g);
            pos = midpoint(l.xy, f);
          }
        } else if (fd.kind === "sensor-fault") {
          const s = sensorByID.get(c.id);
          pos = s ? sensorPos(s, f) : null;
          if (pos) sv("circle", { class: "ring", cx: pos[0], cy: pos[1], r: 12 }, g);
        } else {
          const n = nodeAt.get(c.id);
          if (n && n.x !== null) {
            pos = [f.px(n.x), f.py(n.y)];
            sv("circle", { class: "ring", cx: pos[0], cy: pos[1], r: rank === 1 ? 13 : 10 }, g);
          }
        }
        if (!pos) continue;
        // Badges sit round the mark, a different side per rank, so the
        // ranks of close candidates stay legible.
        const ang = [-45, -135, 45, 135, -90][i % 5] * Math.PI / 180;
        const bx = pos[0] + 15 * Math.cos(ang), by = pos[1] + 15 * Math.sin(ang);
        sv("circle", { class: "badge", cx: bx, cy: by, r: 8 }, g);
        sv("text", { x: bx, y: by }, g).textContent = String(rank);
        title(g, fd.kind + " candidate " + rank + ": " + c.id + " (score " + fmt(c.score, 2) + ") · zone " + fd.zone);
        if (focus !== null && focus !== key) g.classList.add("dim");
        gCands.appendChild(g);
      }
    });
    document.getElementById("map-hint").textContent = net.links.length + " links · " + net.nodes.length + " nodes";
  }

  function sortedFindings() {
    const list = (view ? view.findings : []).map(f => ({ f, key: [f.kind, f.zone, f.onset, f.raised, (f.candidates && f.candidates[0] || {}).id].join("|") }));
    list.sort((a, b) => (b.f.raised || "").localeCompare(a.f.raised || ""));
    return list;
  }

  function drawLegend() {
    const lg = document.getElementById("legend");
    while (lg.firstChild) lg.removeChild(lg.firstChild);
    const d = scaleMax(view ? view.zones : []);
    const item = (draw, label) => {
      const it = el("span", { class: "item" });
      const s = sv("svg", { width: draw.w || 18, height: 14 }, it);
      draw(s);
      it.appendChild(document.createTextNode(label));
      lg.appendChild(it);
    };
    const bar = el("span", { class: "item" });
    bar.appendChild(document.createTextNode("imbalance −" + d));
    const s = sv("svg", { width: 120, height: 12 }, bar);
    for (let i = 0; i < 24; i++) sv("rect", { x: i * 5, y: 0, width: 5, height: 12, fill: imbalanceColour(-d + (2 * d * (i + 0.5)) / 24, d) }, s);
    bar.appendChild(document.createTextNode("+" + d + " L/s"));
    lg.appendChild(bar);
    for (const q in QUALITY) {
      item(s => sv("path", { d: "M9,1 L15,7 L9,13 L3,7 Z", fill: q === "missing" ? "#faf8f2" : QUALITY[q], stroke: "#1f2d2c" }, s), q);
    }
    item(s => { sv("circle", { cx: 8, cy: 7, r: 5.5, fill: MARK, "fill-opacity": .15, stroke: MARK, "stroke-width": 2.5 }, s); }, "suspected leak (rank badge)");
    item(s => { sv("line", { x1: 1, y1: 7, x2: 17, y2: 7, stroke: MARK, "stroke-width": 4, "stroke-dasharray": "5 2" }, s); }, "suspected blockage");
    item(s => { sv("line", { x1: 1, y1: 7, x2: 17, y2: 7, stroke: "#59646a", "stroke-width": 4 }, s); }, "main (width by diameter)");
    item(s => { sv("path", { d: "M9,1 L15,12 L3,12 Z", fill: "#2e8b57", stroke: "#1f2d2c" }, s); }, "flow meter");
  }

  // ---- tables and lists ----------------------------------------------
  function sparkline(nights) {
    const w = 170, h = 36, pad = 4;
    const s = sv("svg", { class: "spark", width: w, height: h, viewBox: `0 0 ${w} ${h}` });
    const ns = nights.slice(-NIGHTS);
    if (!ns.length) return s;
    let top = 0;
    for (const n of ns) for (const v of [n.min_lps, n.allow_lps]) if (v !== null && isFinite(v)) top = Math.max(top, v);
    top = top > 0 ? top * 1.15 : 1;
    const step = (w - 2 * pad) / Math.max(NIGHTS - 1, 1);
    const x0 = w - pad - (ns.length - 1) * step;
    const X = i => x0 + i * step, Y = v => h - pad - (v / top) * (h - 2 * pad);
    const line = (key, attrs) => {
      let seg = [];
      const flush = () => { if (seg.length > 1) sv("polyline", Object.assign({ points: seg.join(" "), fill: "none" }, attrs), s); seg = []; };
      ns.forEach((n, i) => { const v = n[key]; if (v === null || !isFinite(v)) flush(); else seg.push(X(i).toFixed(1) + "," + Y(v).toFixed(1)); });
      flush();
    };
    line("allow_lps", { stroke: "#9a927f", "stroke-width": 1.2, "stroke-dasharray": "3 2", class: "allow" });
    line("min_lps", { stroke: "#17403f", "stroke-width": 1.5, class: "mnf" });
    ns.forEach((n, i) => {
      if (n.min_lps === null || !isFinite(n.min_lps)) return;
      const last = i === ns.length - 1;
      const over = n.excess_lps !== null && n.excess_lps > 0;
      const c = sv("circle", { cx: X(i), cy: Y(n.min_lps), r: last ? 4 : 1.6, fill: last ? (over ? "#c0502a" : "#3d7ea6") : "#17403f", class: last ? "tonight" : "night" }, s);
      title(c, (last ? "tonight " : "") + utc(n.night) + ": min " + fmt(n.min_lps, 2) + " L/s, allowance " + fmt(n.allow_lps, 2) + ", excess " + fmt(n.excess_lps, 2));
    });
    return s;
  }

  function drawZones() {
    const body = document.querySelector("#zones tbody");
    while (body.firstChild) body.removeChild(body.firstChild);
    const zones = view.zones.slice().sort((a, b) => a.id.localeCompare(b.id));
    const d = scaleMax(zones);
    if (!zones.length) {
      const tr = el("tr");
      tr.appendChild(el("td", { colspan: 7, class: "empty" }, "No zone balances yet."));
      body.appendChild(tr);
    }
    for (const z of zones) {
      const tr = el("tr", { "data-zone": z.id });
      const tonight = z.nights.length ? z.nights[z.nights.length - 1] : null;
      tr.appendChild(el("td", {}, z.id));
      tr.appendChild(el("td", { class: "num" }, fmt(z.inflow_lps, 2)));
      tr.appendChild(el("td", { class: "num" }, fmt(z.expected_lps, 2)));
      const td = el("td", { class: "num" });
      const chip = el("span", { class: "chip imb" }, (Math.round((z.imbalance_lps || 0) * 100) > 0 ? "+" : "") + fmt(z.imbalance_lps, 2));
      chip.style.background = imbalanceColour(z.imbalance_lps, d);
      chip.style.color = Math.abs(z.imbalance_lps || 0) / d > 0.6 ? "#fff" : "#1f2d2c";
      td.appendChild(chip);
      tr.appendChild(td);
      tr.appendChild(el("td", { class: "num" }, tonight ? fmt(tonight.min_lps, 2) : "–"));
      tr.appendChild(el("td", { class: "num" }, tonight ? fmt(tonight.allow_lps, 2) : "–"));
      const sp = el("td");
      sp.appendChild(sparkline(z.nights));
      tr.appendChild(sp);
      body.appendChild(tr);
    }
  }

  function drawFindings() {
    const ol = document.getElementById("findings");
    while (ol.firstChild) ol.removeChild(ol.firstChild);
    const list = sortedFindings();
    document.getElementById("finding-count").textContent = String(list.length);
    if (!list.length) ol.appendChild(el("li", { class: "empty" }, "No findings."));
    for (const { f, key } of list) {
      const li = el("li", { class: f.kind + (focus === key ? " focus" : ""), "data-finding": key, tabindex: 0 });
      const size = f.kind === "blockage" ? (f.open_fraction ? " · open " + Math.round(f.open_fraction * 100) + "%" : "") : (f.size_lps ? " · " + fmt(f.size_lps, 2) + " L/s" : "");
      li.appendChild(el("div", { class: "head" }, f.kind + " · zone " + (f.zone || "–") + size));
      li.appendChild(el("div", { class: "ev" }, "onset " + utc(f.onset) + " · raised " + utc(f.raised)));
      const cands = (f.candidates || []).slice(0, TOP).map((c, i) => (i + 1) + ". " + c.id + " (" + fmt(c.score, 2) + ")").join("  ");
      if (cands) li.appendChild(el("div", { class: "cands" }, cands));
      if (f.evidence) li.appendChild(el("div", { class: "ev" }, f.evidence));
      const toggle = () => { focus = focus === key ? null : key; drawFindings(); drawMap(); };
      li.addEventListener("click", toggle);
      li.addEventListener("keydown", e => { if (e.key === "Enter" || e.key === " ") { e.preventDefault(); toggle(); } });
      ol.appendChild(li);
    }
  }

  // Which actions each state accepts (the alerts lifecycle table).
  const ACCEPTS = {
    "unacknowledged": ["ack", "shelve", "clear"],
    "acknowledged": ["shelve", "clear"],
    "returned-unacknowledged": ["ack", "shelve", "clear"],
    "shelved": ["clear"],
  };
  function drawAlerts() {
    const box = document.getElementById("alerts");
    while (box.firstChild) box.removeChild(box.firstChild);
    const list = view.alerts.slice().sort((a, b) => a.id.localeCompare(b.id));
    document.getElementById("alert-count").textContent = String(list.length);
    if (!list.length) { box.appendChild(el("p", { class: "empty" }, "No open alerts.")); return; }
    for (const a of list) {
      const card = el("div", { class: "alert kind-" + a.kind, "data-id": a.id, "data-state": a.state });
      const head = el("div", { class: "a-head" });
      head.appendChild(el("strong", {}, a.id));
      head.appendChild(document.createTextNode(" " + a.kind + " · zone " + (a.zone || "–") + " "));
      head.appendChild(el("span", { class: "chip state state-" + a.state }, a.state));
      card.appendChild(head);
      const where = (a.candidates && a.candidates.length) ? "best candidate " + a.candidates[0].id : "zone-wide";
      const size = a.kind === "blockage" ? (a.open_fraction ? " · open " + Math.round(a.open_fraction * 100) + "%" : "") : (a.size_lps ? " · " + fmt(a.size_lps, 2) + " L/s" : "");
      card.appendChild(el("div", { class: "a-meta" }, (a.severity ? a.severity + " · " : "") + "raised " + utc(a.raised) + " · " + where + size));
      if (a.acked_by) card.appendChild(el("div", { class: "a-meta" }, "acknowledged by " + a.acked_by + (a.ack_comment ? ": " + a.ack_comment : "")));
      if (a.shelved_until) card.appendChild(el("div", { class: "a-meta" }, "shelved by " + (a.shelved_by || "–") + " until " + utc(a.shelved_until)));
      const acts = el("div", { class: "a-act" });
      const ok = ACCEPTS[a.state] || [];
      for (const [act, label] of [["ack", "Acknowledge"], ["shelve", "Shelve"], ["clear", "Clear"]]) {
        const b = el("button", { type: "button", "data-action": act, "data-id": a.id, class: act === "ack" ? "" : "quiet" }, label);
        b.disabled = !ok.includes(act);
        b.addEventListener("click", () => openAction(a, act));
        acts.appendChild(b);
      }
      card.appendChild(acts);
      box.appendChild(card);
    }
  }

  // ---- actions ---------------------------------------------------------
  let pending = null;
  function openAction(a, act) {
    pending = { id: a.id, act };
    const dlg = document.getElementById("act");
    const names = { ack: "Acknowledge", shelve: "Shelve", clear: "Clear" };
    document.getElementById("act-title").textContent = names[act] + " " + a.id;
    document.getElementById("act-what").textContent = a.kind + " in zone " + (a.zone || "–") + ", " + a.state + ((a.candidates && a.candidates.length) ? ", best candidate " + a.candidates[0].id : "");
    document.getElementById("act-duration-row").hidden = act !== "shelve";
    document.getElementById("act-text-label").textContent = act === "ack" ? "Comment" : "Reason" + (act === "clear" ? " (required)" : "");
    document.getElementById("act-text").value = "";
    document.getElementById("act-text").required = act === "clear";
    document.getElementById("act-by").value = sessionStorage.getItem(BY_KEY) || "";
    const hasToken = !!sessionStorage.getItem(TOKEN_KEY);
    document.getElementById("act-token-row").hidden = hasToken;
    document.getElementById("act-token").required = !hasToken;
    document.getElementById("act-token").value = "";
    document.getElementById("act-error").textContent = "";
    dlg.showModal();
  }
  async function submitAction(e) {
    e.preventDefault();
    if (!pending) return;
    const by = document.getElementById("act-by").value.trim();
    const text = document.getElementById("act-text").value.trim();
    const typed = document.getElementById("act-token").value;
    const token = sessionStorage.getItem(TOKEN_KEY) || typed;
    const errBox = document.getElementById("act-error");
    if (!by) { errBox.textContent = "Your name is required."; return; }
    if (!token) { errBox.textContent = "The operator token is required."; return; }
    let body;
    if (pending.act === "ack") body = { by, comment: text };
    else if (pending.act === "shelve") body = { by, duration: document.getElementById("act-duration").value, reason: text };
    else body = { by, reason: text };
    const btn = document.getElementById("act-submit");
    btn.disabled = true;
    try {
      const r = await fetch("/api/alerts/" + encodeURIComponent(pending.id) + "/" + pending.act, {
        method: "POST", cache: "no-store",
        headers: { "Content-Type": "application/json", "Authorization": "Bearer " + token },
        body: JSON.stringify(body),
      });
      let answer = {};
      try { answer = await r.json(); } catch (_) { /* not JSON */ }
      if (r.status === 401) {
        sessionStorage.removeItem(TOKEN_KEY);
        document.getElementById("act-token-row").hidden = false;
        document.getElementById("act-token").required = true;
        document.getElementById("act-token").value = "";
        document.getElementById("act-token").focus();
        errBox.textContent = "The token was refused; enter the operator token.";
        return;
      }
      if (!r.ok) { errBox.textContent = answer.error || ("HTTP " + r.status); return; }
      sessionStorage.setItem(TOKEN_KEY, token);
      sessionStorage.setItem(BY_KEY, by);
      document.getElementById("act-token").value = "";
      document.getElementById("act").close();
      pending = null;
      session();
      refresh();
    } catch (err) {
      errBox.textContent = "No answer from the service: " + err.message;
    } finally {
      btn.disabled = false;
    }
  }
  function session() {
    const by = sessionStorage.getItem(BY_KEY);
    document.getElementById("who").textContent = by ? "operator " + by : "";
    document.getElementById("forget").hidden = !sessionStorage.getItem(TOKEN_KEY);
  }

  // ---- refresh loop ----------------------------------------------------
  function drawStatus(err) {
    const st = document.getElementById("status");
    while (st.firstChild) st.removeChild(st.firstChild);
    if (view) st.appendChild(document.createTextNode("step " + utc(view.step) + " · updated " + utc(view.updated)));
    if (err) {
      st.appendChild(document.createTextNode(" · "));
      st.appendChild(el("span", { class: "down" }, "no answer" + (lastOK ? " since " + clock(lastOK) : "") + ": " + err.message));
    } else if (lastOK) {
      st.appendChild(document.createTextNode(" · checked " + clock(lastOK)));
    }
  }
  async function refresh() {
    clearTimeout(timer);
    try {
      if (!net) {
        net = await getJSON("/api/network");
        nodeAt = new Map(net.nodes.map(n => [n.id, n]));
        linkAt = new Map(net.links.map(l => [l.id, l]));
      }
      view = await getJSON("/api/view");
      lastOK = new Date();
      drawMap(); drawLegend(); drawZones(); drawFindings(); drawAlerts(); drawStatus(null);
      document.body.setAttribute("data-loaded", String(Number(document.body.getAttribute("data-loaded") || 0) + 1));
    } catch (err) {
      drawStatus(err);
    }
    timer = setTimeout(refresh, REFRESH_MS);
  }

  document.addEventListener("DOMContentLoaded", () => {
    document.getElementById("act-form").addEventListener("submit", submitAction);
    document.getElementById("act-cancel").addEventListener("click", () => { pending = null; document.getElementById("act").close(); });
    document.getElementById("forget").addEventListener("click", () => { sessionStorage.removeItem(TOKEN_KEY); session(); });
    let rt = null;
    window.addEventListener("resize", () => { clearTimeout(rt); rt = setTimeout(drawMap, 150); });
    session();
    refresh();
  });
})();

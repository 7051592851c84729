// The lab overview: one card per bench, kept up to date from the lab's
// websocket (a snapshot first, then one message per change).
"use strict";
(function () {
  const benches = new Map(); // id -> {id, status, runs: Map(id -> run)}
  const main = document.getElementById("benches");
  const brokerBadge = document.getElementById("broker");
  const token = new URLSearchParams(location.hash.slice(1)).get("token");
  let dirty = new Set();

  function bench(id) {
    let b = benches.get(id);
    if (!b) { b = { id: id, status: null, runs: new Map() }; benches.set(id, b); }
    return b;
  }
  function run(b, id) {
    let r = b.runs.get(id);
    if (!r) { r = { id: id, state: null, points: [], seqs: new Set(), result: null }; b.runs.set(id, r); }
    return r;
  }
  function addPoint(r, p) {
    if (r.seqs.has(p.seq)) return;
    r.seqs.add(p.seq);
    r.points.push(p);
  }
  function setBroker(on) {
    brokerBadge.textContent = on ? "broker: connected" : "broker: not connected";
    brokerBadge.className = on ? "badge" : "badge off";
  }
  function onMessage(m) {
    switch (m.type) {
      case "snapshot":
        benches.clear();
        setBroker(m.broker_connected);
        for (const sb of m.benches || []) {
          const b = bench(sb.id);
          b.status = sb.status || null;
          for (const sr of sb.runs || []) {
            const r = run(b, sr.id);
            r.state = sr.state || null;
            r.result = sr.result || null;
            for (const p of sr.points || []) addPoint(r, p);
          }
          dirty.add(sb.id);
        }
        main.textContent = "";
        break;
      case "broker": setBroker(m.connected); return;
      case "status": bench(m.bench).status = m.status; break;
      case "state": run(bench(m.bench), m.run).state = m.state; break;
      case "points": addPoint(run(bench(m.bench), m.run), m.point); break;
      case "result": run(bench(m.bench), m.run).result = m.result; break;
      default: return;
    }
    if (m.bench) dirty.add(m.bench);
    schedule();
  }

  let pending = false;
  function schedule() {
    if (pending) return;
    pending = true;
    requestAnimationFrame(function () { pending = false; for (const id of dirty) render(id); dirty = new Set(); });
  }
  function fmtHz(v) {
    if (typeof v !== "number") return "–";
    if (v >= 1e6) return (v / 1e6).toPrecision(4) + " MHz";
    if (v >= 1e3) return (v / 1e3).toPrecision(4) + " kHz";
    return v.toPrecision(4) + " Hz";
  }
  function el(tag, cls, text) {
    const e = document.createElement(tag);
    if (cls) e.className = cls;
    if (text !== undefined) e.textContent = text;
    return e;
  }
  function current(b) {
    const id = b.status && b.status.run;
    if (id && b.runs.has(id)) return b.runs.get(id);
    let last = null;
    for (const r of b.runs.values()) if (!last || r.id > last.id) last = r;
    return last;
  }
  function render(id) {
    const b = benches.get(id);
    if (!b) return;
    const empty = document.getElementById("empty");
    if (empty) empty.remove();
    let card = document.getElementById("bench-" + id);
    if (!card) {
      card = el("section", "bench");
      card.id = "bench-" + id;
      const ids = Array.from(benches.keys()).sort();
      const next = ids.slice(ids.indexOf(id) + 1).map(function (x) { return document.getElementById("bench-" + x); }).find(Boolean);
      main.insertBefore(card, next || null);
    }
    card.textContent = "";
    const online = !!(b.status && b.status.online);
    const h = el("h2", "", b.id);
    h.appendChild(el("span", online ? "badge" : "badge off", online ? "online" : "offline" + (b.status && b.status.reason ? " (" + b.status.reason + ")" : "")));
    card.appendChild(h);
    const r = current(b);
    if (r) {
      const st = r.state || {};
      const total = Math.max(st.plan_points || 0, r.points.length);
      card.appendChild(el("div", "run", (st.name || r.id) + " — " + (st.state || "?") + " — " + r.points.length + " / " + (st.plan_points || "?") + " points"));
      const bar = el("div", "bar"), fill = el("div");
      const ended = st.state === "done" || st.state === "aborted" || st.state === "failed";
      fill.style.width = (st.state === "done" ? 100 : total ? Math.min(100, 100 * r.points.length / total) : 0) + "%";
      if (ended && st.state !== "done") fill.style.background = "#8d2b2b";
      bar.appendChild(fill);
      card.appendChild(bar);
      const c = el("canvas");
      card.appendChild(c);
      plot(c, r.points);
    }
    const done = Array.from(b.runs.values()).filter(function (x) { return x.result; }).sort(function (a, c) { return a.id < c.id ? 1 : -1; }).slice(0, 5);
    if (done.length) {
      const t = el("table");
      for (const x of done) {
        const tr = el("tr");
        tr.appendChild(el("td", "", (x.state && x.state.name) || x.id));
        tr.appendChild(el("td", "", "low " + fmtHz(x.result.low_hz)));
        tr.appendChild(el("td", "", "high " + fmtHz(x.result.high_hz)));
        const m = x.result.mask;
        tr.appendChild(m ? el("td", m.pass ? "pass" : "fail", m.pass ? "mask pass" : "mask FAIL") : el("td", "", ""));
        t.appendChild(tr);
      }
      card.appendChild(t);
    }
  }
  // plot draws gain (dB) against log frequency.
  function plot(c, pts) {
    const w = c.clientWidth || 320, hgt = c.clientHeight || 150, dpr = window.devicePixelRatio || 1;
    c.width = w * dpr; c.height = hgt * dpr;
    const g = c.getContext("2d");
    g.scale(dpr, dpr);
    g.strokeStyle = "#ccd"; g.strokeRect(0.5, 0.5, w - 1, hgt - 1);
    const ps = pts.filter(function (p) { return p.point && p.point.freq_hz > 0 && isFinite(p.point.gain_db); })
      .sort(function (a, b) { return a.point.freq_hz - b.point.freq_hz; });
    if (ps.length < 1) return;
    let fx0 = Infinity, fx1 = -Infinity, y0 = Infinity, y1 = -Infinity;
    for (const p of ps) {
      const lx = Math.log10(p.point.freq_hz);
      fx0 = Math.min(fx0, lx); fx1 = Math.max(fx1, lx);
      y0 = Math.min(y0, p.point.gain_db); y1 = Math.max(y1, p.point.gain_db);
    }
    if (fx1 - fx0 < 1e-9) { fx0 -= 0.5; fx1 += 0.5; }
    if (y1 - y0 < 1) { y0 -= 0.5; y1 += 0.5; }
    const X = function (f) { return 4 + (w - 8) * (Math.log10(f) - fx0) / (fx1 - fx0); };
    const Y = function (d) { return hgt - 4 - (hgt - 8) * (d - y0) / (y1 - y0); };
    g.strokeStyle = "#3461c1"; g.lineWidth = 1.5; g.beginPath();
    ps.forEach(function (p, i) { const x = X(p.point.freq_hz), y = Y(p.point.gain_db); if (i) g.lineTo(x, y); else g.moveTo(x, y); });
    g.stroke();
    g.fillStyle = "#555"; g.font = "10px sans-serif";
    g.fillText(y1.toFixed(1) + " dB", 6, 12); g.fillText(y0.toFixed(1) + " dB", 6, hgt - 6);
  }

  function connect() {
    const protos = ["rolloff.lab.v1"];
    if (token) protos.push("rolloff-token." + token);
    const ws = new WebSocket((location.protocol === "https:" ? "wss://" : "ws://") + location.host + "/api/live", protos);
    ws.onmessage = function (e) { try { onMessage(JSON.parse(e.data)); } catch (err) { console.error(err); } };
    ws.onclose = function () { setBroker(false); setTimeout(connect, 1000); };
  }
  connect();
})();

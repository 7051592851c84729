// plot.js: the live gain plot, drawn on a canvas by hand. Gain in dB
// against logarithmic frequency; excluded points drawn hollow or crossed;
// the -3 dB level and the corners as dashed lines; hover shows the values.
'use strict';
(function (global) {
  const COLORS = {
    grid: '#e6e9ed', gridMinor: '#f1f3f5', axis: '#8a96a3', text: '#4a5568',
    line: '#23707a', point: '#23707a', refined: '#6b5fb5', hollow: '#b7791f',
    cross: '#a33a3a', level: '#b7791f', corner: '#6b5fb5',
  };

  function fmtHz(v) {
    if (!isFinite(v)) return '–';
    const a = Math.abs(v);
    if (a >= 1e6) return trim(v / 1e6) + ' MHz';
    if (a >= 1e3) return trim(v / 1e3) + ' kHz';
    return trim(v) + ' Hz';
  }
  function trim(v) {
    const s = Math.abs(v) >= 100 ? v.toFixed(1) : Math.abs(v) >= 10 ? v.toFixed(2) : v.toFixed(3);
    return s.replace(/\.?0+$/, '');
  }
  function excluded(p) {
    const f = p.flags || [];
    return f.includes('under-range') || f.includes('over-range') || f.includes('unsettled') || f.includes('clipped') || f.includes('beyond-converter-band');
  }
  function markerOf(p) {
    const f = p.flags || [];
    if (f.includes('unsettled') || f.includes('clipped')) return 'cross';
    if (f.includes('under-range') || f.includes('over-range') || f.includes('beyond-converter-band')) return 'hollow';
    if (f.includes('refined')) return 'refined';
    return 'point';
  }

  function niceStep(span, target) {
    const raw = span / target;
    const mag = Math.pow(10, Math.floor(Math.log10(raw)));
    for (const m of [1, 2, 5, 10]) if (m * mag >= raw) return m * mag;
    return 10 * mag;
  }

  function Plot(canvas, tip) {
    this.canvas = canvas;
    this.tip = tip;
    this.points = [];
    this.xRange = null; // [fmin, fmax] from the plan
    this.levelDB = null;
    this.corners = [];
    this.hover = null;
    const self = this;
    canvas.addEventListener('mousemove', function (e) { self.onMove(e); });
    canvas.addEventListener('mouseleave', function () { self.hover = null; self.tip.hidden = true; self.draw(); });
    global.addEventListener('resize', function () { self.draw(); });
  }

  Plot.prototype.reset = function (xRange) {
    this.points = [];
    this.xRange = xRange || null;
    this.levelDB = null;
    this.corners = [];
    this.hover = null;
    this.tip.hidden = true;
    this.draw();
  };

  Plot.prototype.setPoints = function (points) { this.points = points; this.draw(); };
  Plot.prototype.setMarkers = function (levelDB, corners) {
    this.levelDB = levelDB;
    this.corners = corners || [];
    this.canvas.dataset.corners = JSON.stringify(this.corners.map(function (c) { return c.hz; }));
    this.draw();
  };

  Plot.prototype.layout = function () {
    const c = this.canvas;
    const dpr = global.devicePixelRatio || 1;
    const w = c.clientWidth || 900, h = c.clientHeight || 420;
    if (c.width !== Math.round(w * dpr) || c.height !== Math.round(h * dpr)) {
      c.width = Math.round(w * dpr);
      c.height = Math.round(h * dpr);
    }
    const pts = this.points.filter(function (p) { return p.freq_hz > 0 && isFinite(p.gain_db); });
    let fmin, fmax;
    if (this.xRange && this.xRange[0] > 0 && this.xRange[1] > this.xRange[0]) {
      fmin = this.xRange[0]; fmax = this.xRange[1];
    } else if (pts.length) {
      fmin = Math.min.apply(null, pts.map(function (p) { return p.freq_hz; }));
      fmax = Math.max.apply(null, pts.map(function (p) { return p.freq_hz; }));
    } else { fmin = 10; fmax = 100000; }
    for (const p of pts) { fmin = Math.min(fmin, p.freq_hz); fmax = Math.max(fmax, p.freq_hz); }
    if (fmax / fmin < 10) { const m = Math.sqrt(fmax * fmin); fmin = m / 3.17; fmax = m * 3.17; }
    let lx = Math.log10(fmin), hx = Math.log10(fmax);
    lx = Math.floor(lx * 10) / 10; hx = Math.ceil(hx * 10) / 10;
    let ymin = Infinity, ymax = -Infinity;
    for (const p of pts) { ymin = Math.min(ymin, p.gain_db); ymax = Math.max(ymax, p.gain_db); }
    if (this.levelDB !== null) { ymin = Math.min(ymin, this.levelDB); ymax = Math.max(ymax, this.levelDB); }
    if (!isFinite(ymin)) { ymin = -12; ymax = 3; }
    if (ymax - ymin < 6) { const m = (ymax + ymin) / 2; ymin = m - 3; ymax = m + 3; }
    const pad = (ymax - ymin) * 0.08;
    ymin -= pad; ymax += pad;
    const step = niceStep(ymax - ymin, 7);
    ymin = Math.floor(ymin / step) * step; ymax = Math.ceil(ymax / step) * step;
    const m = { l: 58, r: 18, t: 16, b: 40 };
    return { dpr: dpr, w: w, h: h, m: m, lx: lx, hx: hx, ymin: ymin, ymax: ymax, ystep: step, pts: pts };
  };

  Plot.prototype.draw = function () {
    const L = this.layout();
    this.L = L;
    const ctx = this.canvas.getContext('2d');
    const m = L.m, W = L.w - m.l - m.r, H = L.h - m.t - m.b;
    const X = function (f) { return m.l + (Math.log10(f) - L.lx) / (L.hx - L.lx) * W; };
    const Y = function (db) { return m.t + (L.ymax - db) / (L.ymax - L.ymin) * H; };
    this.X = X; this.Y = Y;
    ctx.setTransform(L.dpr, 0, 0, L.dpr, 0, 0);
    ctx.clearRect(0, 0, L.w, L.h);
    ctx.font = '12px system-ui, sans-serif';
    ctx.lineWidth = 1;
    // Frequency grid: decades and 2..9 within them.
    for (let d = Math.floor(L.lx); d <= Math.ceil(L.hx); d++) {
      for (let k = 1; k <= 9; k++) {
        const f = k * Math.pow(10, d);
        const lf = Math.log10(f);
        if (lf < L.lx - 1e-9 || lf > L.hx + 1e-9) continue;
        const x = Math.round(X(f)) + 0.5;
        ctx.strokeStyle = k === 1 ? COLORS.grid : COLORS.gridMinor;
        ctx.beginPath(); ctx.moveTo(x, m.t); ctx.lineTo(x, m.t + H); ctx.stroke();
        if (k === 1 || (k === 2 || k === 5) && (L.hx - L.lx) < 3.5) {
          ctx.fillStyle = k === 1 ? COLORS.text : COLORS.axis;
          ctx.textBaseline = 'top';
          const label = fmtHz(f), half = ctx.measureText(label).width / 2;
          ctx.textAlign = x + half > L.w - 2 ? 'right' : x - half < 2 ? 'left' : 'center';
          ctx.fillText(label, ctx.textAlign === 'right' ? L.w - 2 : ctx.textAlign === 'left' ? 2 : x, m.t + H + 6);
        }
      }
    }
    // Gain grid.
    for (let y = L.ymin; y <= L.ymax + 1e-9; y += L.ystep) {
      const py = Math.round(Y(y)) + 0.5;
      ctx.strokeStyle = COLORS.grid;
      ctx.beginPath(); ctx.moveTo(m.l, py); ctx.lineTo(m.l + W, py); ctx.stroke();
      ctx.fillStyle = COLORS.text; ctx.textAlign = 'right'; ctx.textBaseline = 'middle';
      ctx.fillText((Math.abs(y) < 1e-9 ? 0 : +y.toFixed(2)) + ' dB', m.l - 6, py);
    }
    ctx.strokeStyle = COLORS.axis;
    ctx.strokeRect(m.l + 0.5, m.t + 0.5, W, H);
    ctx.fillStyle = COLORS.axis; ctx.textAlign = 'center'; ctx.textBaseline = 'bottom';
    ctx.fillText('frequency', m.l + W / 2, L.h - 2);
    ctx.save();
    ctx.beginPath(); ctx.rect(m.l, m.t, W, H); ctx.clip();
    // Level line.
    if (this.levelDB !== null && isFinite(this.levelDB)) {
      ctx.strokeStyle = COLORS.level; ctx.setLineDash([6, 4]); ctx.lineWidth = 1.5;
      const py = Y(this.levelDB);
      ctx.beginPath(); ctx.moveTo(m.l, py); ctx.lineTo(m.l + W, py); ctx.stroke();
      ctx.setLineDash([]);
      ctx.fillStyle = COLORS.level; ctx.textAlign = 'left'; ctx.textBaseline = 'bottom';
      ctx.fillText('−3 dB', m.l + 6, py - 3);
    }
    // Corners.
    for (const c of this.corners) {
      if (!(c.hz > 0)) continue;
      const px = X(c.hz);
      ctx.strokeStyle = COLORS.corner; ctx.setLineDash([4, 4]); ctx.lineWidth = 1.5;
      ctx.beginPath(); ctx.moveTo(px, m.t); ctx.lineTo(px, m.t + H); ctx.stroke();
      ctx.setLineDash([]);
      ctx.fillStyle = COLORS.corner; ctx.textBaseline = 'top';
      const label = (c.label ? c.label + ' ' : '') + fmtHz(c.hz);
      const tw = ctx.measureText(label).width;
      ctx.textAlign = px + tw + 8 > m.l + W ? 'right' : 'left';
      ctx.fillText(label, ctx.textAlign === 'right' ? px - 4 : px + 4, m.t + 4);
    }
    // Curve through the points the analysis keeps.
    const kept = L.pts.filter(function (p) { return !excluded(p); }).sort(function (a, b) { return a.freq_hz - b.freq_hz; });
    if (kept.length > 1) {
      ctx.strokeStyle = COLORS.line; ctx.lineWidth = 1.6;
      ctx.beginPath();
      kept.forEach(function (p, i) { const px = X(p.freq_hz), py = Y(p.gain_db); if (i) ctx.lineTo(px, py); else ctx.moveTo(px, py); });
      ctx.stroke();
    }
    for (const p of L.pts) drawMarker(ctx, markerOf(p), X(p.freq_hz), Y(p.gain_db), this.hover === p);
    ctx.restore();
    this.canvas.dataset.points = String(L.pts.length);
  };

  function drawMarker(ctx, kind, x, y, hot) {
    const r = hot ? 5.5 : 3.4;
    ctx.lineWidth = 1.6;
    switch (kind) {
      case 'hollow':
        ctx.strokeStyle = COLORS.hollow; ctx.fillStyle = '#fff';
        ctx.beginPath(); ctx.arc(x, y, r + 0.8, 0, 2 * Math.PI); ctx.fill(); ctx.stroke(); break;
      case 'cross':
        ctx.strokeStyle = COLORS.cross;
        ctx.beginPath(); ctx.moveTo(x - r, y - r); ctx.lineTo(x + r, y + r); ctx.moveTo(x + r, y - r); ctx.lineTo(x - r, y + r); ctx.stroke(); break;
      case 'refined':
        ctx.fillStyle = COLORS.refined;
        ctx.beginPath(); ctx.moveTo(x, y - r - 1); ctx.lineTo(x + r + 1, y); ctx.lineTo(x, y + r + 1); ctx.lineTo(x - r - 1, y); ctx.closePath(); ctx.fill(); break;
      default:
        ctx.fillStyle = COLORS.point;
        ctx.beginPath(); ctx.arc(x, y, r, 0, 2 * Math.PI); ctx.fill();
    }
  }

  Plot.prototype.onMove = function (e) {
    if (!this.L || !this.X) return;
    const rect = this.canvas.getBoundingClientRect();
    const mx = e.clientX - rect.left, my = e.clientY - rect.top;
    let best = null, bd = 14 * 14;
    for (const p of this.L.pts) {
      const dx = this.X(p.freq_hz) - mx, dy = this.Y(p.gain_db) - my;
      const d = dx * dx + dy * dy;
      if (d < bd) { bd = d; best = p; }
    }
    if (best !== this.hover) { this.hover = best; this.draw(); }
    if (!best) { this.tip.hidden = true; return; }
    const lines = [
      fmtHz(best.freq_hz) + '  ' + best.gain_db.toFixed(3) + ' dB',
      'Vout ' + fmtV(best.vout_vrms) + ' on ' + (best.range || '?') + ' (' + Math.round((best.fraction_fs || 0) * 100) + ' % FS)',
      'point #' + best.seq + (best.flags && best.flags.length ? ' · ' + best.flags.join(', ') : ''),
    ];
    this.tip.textContent = '';
    lines.forEach(function (s, i) { if (i) this.tip.appendChild(document.createElement('br')); this.tip.appendChild(document.createTextNode(s)); }, this);
    this.tip.hidden = false;
    const tx = Math.min(this.X(best.freq_hz) + 12, rect.width - this.tip.offsetWidth - 4);
    this.tip.style.left = Math.max(0, tx) + 'px';
    this.tip.style.top = Math.max(0, this.Y(best.gain_db) - this.tip.offsetHeight - 8) + 'px';
  };

  function fmtV(v) {
    if (!isFinite(v)) return '–';
    const a = Math.abs(v);
    if (a >= 1) return trim(v) + ' V';
    if (a >= 1e-3) return trim(v * 1e3) + ' mV';
    return trim(v * 1e6) + ' µV';
  }

  // liveCorners estimates the corners from the points so far: the
  // crossings of ref-3.0103 dB, interpolated linearly in log f, where ref
  // is the gain nearest refHz.
  function liveCorners(points, refHz) {
    const kept = points.filter(function (p) { return !excluded(p) && p.freq_hz > 0 && isFinite(p.gain_db); })
      .sort(function (a, b) { return a.freq_hz - b.freq_hz; });
    if (kept.length < 2) return { levelDB: null, corners: [] };
    let ref = kept[0];
    for (const p of kept) if (Math.abs(Math.log(p.freq_hz / refHz)) < Math.abs(Math.log(ref.freq_hz / refHz))) ref = p;
    const level = ref.gain_db - 10 * Math.log10(2);
    const corners = [];
    const iref = kept.indexOf(ref);
    for (let i = iref; i > 0; i--) {
      const a = kept[i - 1], b = kept[i];
      if ((a.gain_db - level) * (b.gain_db - level) <= 0 && a.gain_db !== b.gain_db) { corners.push({ hz: cross(a, b, level), label: 'fL' }); break; }
    }
    for (let i = iref; i < kept.length - 1; i++) {
      const a = kept[i], b = kept[i + 1];
      if ((a.gain_db - level) * (b.gain_db - level) <= 0 && a.gain_db !== b.gain_db) { corners.push({ hz: cross(a, b, level), label: 'fH' }); break; }
    }
    return { levelDB: level, corners: corners };
  }
  function cross(a, b, level) {
    const t = (level - a.gain_db) / (b.gain_db - a.gain_db);
    return Math.pow(10, Math.log10(a.freq_hz) + t * (Math.log10(b.freq_hz) - Math.log10(a.freq_hz)));
  }

  global.RolloffPlot = { Plot: Plot, fmtHz: fmtHz, fmtV: fmtV, liveCorners: liveCorners, excluded: excluded };
})(window);

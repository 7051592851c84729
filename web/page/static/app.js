// app.js: the rolloff page. Talks to the daemon's JSON API and follows a
// run live over a websocket.
'use strict';
(function () {
  const $ = function (id) { return document.getElementById(id); };
  const P = window.RolloffPlot;
  const FINAL = ['done', 'aborted', 'failed'];
  const LIVE = ['preparing', 'settling', 'reading', 'paused', 'waiting-for-operator'];

  // --- the access token: handed to this page once, kept for the tab only.
  let token = document.querySelector('meta[name=rolloff-token]').content || '';
  const needToken = document.querySelector('meta[name=rolloff-need-token]').content === '1';
  try {
    if (token) sessionStorage.setItem('rolloff-token', token);
    else token = sessionStorage.getItem('rolloff-token') || '';
  } catch (e) { /* storage disabled: keep it in memory */ }
  if (location.search.indexOf('once=') >= 0) history.replaceState(null, '', '/');
  if (needToken && !token) $('token-banner').hidden = false;

  const state = {
    bench: null,
    runId: null,
    run: null,
    points: new Map(), // seq -> point
    result: null,
    prompt: null,
    ws: null,
    wsWanted: false,
    runs: [],
    estimated: null, // the body last estimated
  };
  window.rolloff = state; // for the curious and for tests

  const plot = new P.Plot($('plot'), $('tip'));
  state.plot = plot;
  plot.reset();

  function headers(json) {
    const h = {};
    if (json) h['Content-Type'] = 'application/json';
    if (token) h['X-Rolloff-Token'] = token;
    return h;
  }

  async function api(method, path, body) {
    const opts = { method: method, headers: headers(body !== undefined), credentials: 'same-origin', cache: 'no-store' };
    if (body !== undefined) opts.body = JSON.stringify(body);
    const r = await fetch(path, opts);
    const ct = r.headers.get('Content-Type') || '';
    const data = ct.indexOf('application/json') === 0 ? await r.json() : null;
    if (!r.ok) {
      const err = new Error((data && data.error) || (r.status + ' ' + r.statusText));
      err.field = data && data.field;
      err.status = r.status;
      throw err;
    }
    return data;
  }

  function notice(text, kind) {
    const n = $('notice');
    n.textContent = text;
    n.className = 'banner' + (kind ? ' ' + kind : '');
    n.hidden = !text;
  }

  function log(text) {
    const l = $('live-log');
    const d = document.createElement('div');
    d.textContent = new Date().toLocaleTimeString() + '  ' + text;
    l.appendChild(d);
    while (l.childNodes.length > 200) l.removeChild(l.firstChild);
    l.scrollTop = l.scrollHeight;
  }

  function fmtDuration(s) {
    if (!isFinite(s) || s < 0) return '–';
    if (s > 0 && s < 1) return 'under 1 s';
    s = Math.round(s);
    if (s < 60) return s + ' s';
    const m = Math.floor(s / 60), r = s % 60;
    if (m < 60) return m + ' min ' + (r ? r + ' s' : '');
    return Math.floor(m / 60) + ' h ' + (m % 60) + ' min';
  }

  // --- the bench
  async function loadBench() {
    try {
      const b = await api('GET', '/api/bench');
      state.bench = b;
      const chip = $('bench-chip');
      const n = (b.instruments || []).length;
      const ok = (b.instruments || []).every(function (i) { return i.connected; });
      chip.textContent = (b.simulated ? 'simulated bench' : 'bench') + ' · ' + n + ' instrument' + (n === 1 ? '' : 's');
      chip.className = 'chip ' + (ok ? 'ok' : 'bad');
      chip.title = (b.instruments || []).map(function (i) {
        const id = i.identity || {};
        return i.role + ': ' + [id.manufacturer, id.model, id.serial, id.firmware].filter(Boolean).join(', ') + (i.connected ? '' : ' (not connected)');
      }).join('\n');
      const f = $('plan-form');
      if (!state.strategyWatched) {
        state.strategyWatched = true;
        f.strategy.addEventListener('change', function () { state.strategyTouched = true; });
      }
      if ((b.roles || []).indexOf('switch') >= 0 && !state.strategyTouched) {
        // The converter's range is relay-switched: no hand needed.
        f.strategy.value = 'remote';
      }
      if (b.limits) {
        if (b.limits.max_vrms > 0) f.vrms.max = b.limits.max_vrms;
        if (b.limits.min_freq_hz > 0) { f.start_hz.min = b.limits.min_freq_hz; f.stop_hz.min = b.limits.min_freq_hz; }
        if (b.limits.max_freq_hz > 0) { f.start_hz.max = b.limits.max_freq_hz; f.stop_hz.max = b.limits.max_freq_hz; }
      }
    } catch (e) {
      $('bench-chip').textContent = 'bench: ' + e.message;
      $('bench-chip').className = 'chip bad';
    }
  }

  // --- the plan form
  let planFile = null; // {name, body}

  function planBody() {
    if (planFile) return planFile.body;
    const f = $('plan-form');
    return {
      name: f.name.value.trim() || 'sweep',
      frequencies: {
        spacing: 'log',
        start_hz: parseFloat(f.start_hz.value),
        stop_hz: parseFloat(f.stop_hz.value),
        points_per_decade: parseInt(f.points_per_decade.value, 10),
      },
      level: { vrms: parseFloat(f.vrms.value) },
      ranging: { strategy: f.strategy.value },
      refine: { enabled: f.refine.checked },
    };
  }

  function formError(e) {
    const box = $('form-error');
    if (!e) { box.hidden = true; return; }
    box.textContent = e.message + (e.field ? ' (field ' + e.field + ')' : '');
    box.hidden = false;
  }

  function invalidate() {
    state.estimated = null;
    $('btn-start').disabled = true;
    $('estimate').hidden = true;
  }

  $('plan-form').addEventListener('input', function (e) { if (e.target.id !== 'plan-file') invalidate(); });
  $('plan-file').addEventListener('change', async function () {
    invalidate();
    formError(null);
    const file = this.files && this.files[0];
    const info = $('plan-file-info');
    if (!file) { planFile = null; info.textContent = ''; return; }
    if (file.size > 512 * 1024) { formError(new Error('plan file ' + file.name + ' is larger than 512 KiB')); this.value = ''; return; }
    const text = await file.text();
    // The file goes to the daemon as it is: its strict decoder reports
    // keys given twice and every error with the file's name and line.
    const body = (/\.json$/i.test(file.name) || /^\s*\{/.test(text))
      ? { plan_json: text, file_name: file.name }
      : { plan_toml: text, file_name: file.name };
    planFile = { name: file.name, body: body };
    info.textContent = 'using ' + file.name + ' (the fields above are ignored; clear the file to use them)';
  });

  $('btn-estimate').addEventListener('click', estimate);

  async function estimate() {
    formError(null);
    const body = planBody();
    try {
      const r = await api('POST', '/api/plan/estimate', body);
      state.estimated = body;
      const e = $('estimate');
      e.textContent = r.points + ' points' + (r.refine_max_points ? ' (+ up to ' + r.refine_max_points + ' refined)' : '') +
        ', about ' + fmtDuration(r.duration_s) + (r.time_scale && r.time_scale !== 1 ? ' (' + fmtDuration(r.duration_s / r.time_scale) + ' on this simulated bench)' : '') + '.';
      e.hidden = false;
      $('btn-start').disabled = false;
    } catch (err) {
      formError(err);
    }
  }

  $('plan-form').addEventListener('submit', async function (ev) {
    ev.preventDefault();
    if (!state.estimated) { await estimate(); return; }
    formError(null);
    $('btn-start').disabled = true;
    try {
      const r = await api('POST', '/api/runs', state.estimated);
      log('run ' + r.id + ' accepted');
      invalidate();
      follow(r.id);
      refreshRuns();
    } catch (err) {
      formError(err);
      $('btn-start').disabled = false;
    }
  });

  // --- following a run
  function setState(s, msg) {
    if (!state.run) state.run = {};
    state.run.state = s;
    const el = $('st-state');
    el.textContent = s || 'no run';
    el.dataset.state = s || '';
    const live = LIVE.indexOf(s) >= 0;
    // A run written by another owner (a CLI run, the demo) is only watched.
    const ext = !!(state.run && state.run.external);
    $('btn-pause').disabled = ext || !(live && s !== 'paused');
    $('btn-resume').disabled = ext || !(s === 'paused' || s === 'interrupted');
    $('btn-abort').disabled = ext || !(live || s === 'queued' || s === 'interrupted');
    if (s !== 'waiting-for-operator') hidePrompt();
    if (msg && s !== 'settling' && s !== 'reading') log(s + ': ' + msg);
  }

  function allPoints() {
    return Array.from(state.points.values()).sort(function (a, b) { return a.seq - b.seq; });
  }

  // cornersOf reads the corners from an analysis result: low_hz and
  // high_hz (null when the response does not cross the level in the
  // sweep), with their expanded uncertainties, and threshold_db.
  function cornersOf(result) {
    if (!result) return null;
    const out = [];
    const add = function (hz, u, label) {
      if (typeof hz === 'number' && hz > 0) out.push({ hz: hz, u: typeof u === 'number' ? u : null, label: label });
    };
    add(result.low_hz, result.low_u_hz, 'fL');
    add(result.high_hz, result.high_u_hz, 'fH');
    const level = typeof result.threshold_db === 'number' ? result.threshold_db : null;
    return { levelDB: level, corners: out };
  }

  function cornerText(c) {
    return c.label + ' ' + P.fmtHz(c.hz) + (c.u ? ' ± ' + P.fmtHz(c.u) : '');
  }

  function refHz() {
    const p = state.run && state.run.plan;
    return (p && p.reference_hz) || 1000;
  }

  function redraw() {
    const pts = allPoints();
    plot.setPoints(pts);
    let mk = cornersOf(state.result);
    if (!mk || (!mk.corners.length && mk.levelDB === null)) mk = P.liveCorners(pts, refHz());
    else if (mk.levelDB === null) mk.levelDB = P.liveCorners(pts, refHz()).levelDB;
    plot.setMarkers(mk.levelDB, mk.corners);
    $('st-corners').textContent = mk.corners.length ? mk.corners.map(cornerText).join(' · ') : '–';
    $('st-corners').dataset.final = state.result ? '1' : '';
  }

  let redrawPending = false;
  function scheduleRedraw() {
    if (redrawPending) return;
    redrawPending = true;
    requestAnimationFrame(function () { redrawPending = false; redraw(); });
  }

  function progress(p) {
    if (!p) return;
    $('st-freq').textContent = P.fmtHz(p.freq_hz);
    $('st-done').textContent = p.done + ' / ' + p.total;
    $('st-eta').textContent = fmtDuration(p.eta_s);
    $('st-bar').style.width = (p.total ? Math.min(100, 100 * p.done / p.total) : 0) + '%';
  }

  async function follow(id) {
    closeLive();
    state.runId = id;
    state.points = new Map();
    state.result = null;
    state.prompt = null;
    hidePrompt();
    $('live-title').textContent = 'Run ' + id;
    $('st-freq').textContent = $('st-done').textContent = $('st-eta').textContent = '–';
    $('st-bar').style.width = '0';
    try {
      const info = await api('GET', '/api/runs/' + encodeURIComponent(id));
      if (state.runId !== id) return;
      state.run = info;
      const fr = info.plan && info.plan.frequencies;
      plot.reset(fr && fr.start_hz > 0 && fr.stop_hz > 0 ? [Math.min(fr.start_hz, fr.stop_hz), Math.max(fr.start_hz, fr.stop_hz)] : null);
      setState(info.state);
      if (info.progress) progress(info.progress);
      if (info.result) state.result = info.result;
      if (info.prompt && info.state === 'waiting-for-operator') showPrompt(info.prompt);
    } catch (e) {
      notice('run ' + id + ': ' + e.message, 'bad');
      return;
    }
    openLive(id);
    renderRuns();
  }

  function closeLive() {
    state.wsWanted = false;
    if (state.ws) { try { state.ws.close(1000); } catch (e) { /* closed */ } }
    state.ws = null;
  }

  function openLive(id) {
    state.wsWanted = true;
    const protocols = ['rolloff.live.v1'];
    if (token) protocols.push('rolloff-token.' + token);
    const ws = new WebSocket('ws://' + location.host + '/api/runs/' + encodeURIComponent(id) + '/live', protocols);
    state.ws = ws;
    ws.onmessage = function (m) {
      let ev;
      try { ev = JSON.parse(m.data); } catch (e) { return; }
      onEvent(ev);
    };
    ws.onclose = function (e) {
      if (state.ws !== ws) return;
      state.ws = null;
      if (!state.wsWanted) return;
      const s = state.run && state.run.state;
      if (FINAL.indexOf(s) >= 0 && state.result) return;
      if (e.code === 1001) return; // the daemon is going away
      setTimeout(function () { if (state.runId === id && state.wsWanted && !state.ws) openLive(id); }, 1500);
    };
  }

  function onEvent(ev) {
    switch (ev.type) {
      case 'point':
        if (ev.point && !state.points.has(ev.point.seq)) {
          state.points.set(ev.point.seq, ev.point);
          scheduleRedraw();
        }
        break;
      case 'state':
        setState(ev.state, ev.message);
        if (FINAL.indexOf(ev.state) >= 0 || ev.state === 'interrupted') refreshRuns();
        break;
      case 'prompt':
        if (ev.prompt && !(state.prompt && state.prompt.id === ev.prompt.id && !$('prompt').hidden)) showPrompt(ev.prompt);
        break;
      case 'progress':
        progress(ev.progress);
        break;
      case 'result':
        try { state.result = typeof ev.result === 'string' ? JSON.parse(ev.result) : ev.result; } catch (e) { state.result = null; }
        scheduleRedraw();
        refreshRuns();
        break;
      case 'log':
        if (ev.message) log(ev.message);
        break;
      case 'closing':
        notice(ev.message || 'the daemon is shutting down', 'warn');
        break;
    }
  }

  // --- controls
  async function control(op, body) {
    if (!state.runId) return;
    try {
      await api('POST', '/api/runs/' + encodeURIComponent(state.runId) + '/' + op, body || {});
      if (op === 'resume' && state.run && state.run.state === 'interrupted') follow(state.runId);
    } catch (e) {
      notice(op + ': ' + e.message, 'bad');
    }
  }
  $('btn-pause').addEventListener('click', function () { control('pause'); });
  $('btn-resume').addEventListener('click', function () { control('resume'); });
  $('btn-abort').addEventListener('click', function () {
    if (confirm('Abort run ' + state.runId + '? The generator output is switched off.')) control('abort');
  });

  // --- the operator prompt
  function showPrompt(p) {
    if (state.run && state.run.external) {
      // Another owner's run: its prompts are answered where it was started.
      log('operator prompt ' + p.id + ': select range ' + (p.range || p.range_index) + ' (answered where the run was started)');
      return;
    }
    state.prompt = p;
    $('prompt-range').textContent = p.range || ('#' + p.range_index);
    $('prompt-why').textContent = p.reason || '';
    $('prompt-detail').textContent = 'At ' + P.fmtHz(p.freq_hz) + (p.from_range ? ', from range ' + p.from_range : '') + '. Prompt ' + p.id + '.';
    $('prompt').hidden = false;
    $('btn-confirm').disabled = false;
    $('btn-confirm').focus();
    document.title = '⚠ range change · rolloff';
  }
  function hidePrompt() {
    $('prompt').hidden = true;
    document.title = 'rolloff · frequency response';
  }
  $('btn-confirm').addEventListener('click', async function () {
    const p = state.prompt;
    if (!p) return;
    this.disabled = true;
    try {
      await api('POST', '/api/runs/' + encodeURIComponent(state.runId) + '/confirm', { prompt_id: p.id, range_index: p.range_index });
      log('range ' + (p.range || p.range_index) + ' confirmed');
      // A next prompt may have arrived while this answer was on its way.
      if (state.prompt === p) { state.prompt = null; hidePrompt(); }
    } catch (e) {
      this.disabled = false;
      notice('confirm: ' + e.message, 'bad');
    }
  });
  $('btn-prompt-abort').addEventListener('click', function () { hidePrompt(); control('abort'); });

  // --- run history
  // The list is paged and filtered by the daemon: RUN_PAGE runs at a time,
  // newest first.
  const RUN_PAGE = 50;
  const runsView = { offset: 0, next: null, batch: '' };
  function runsQuery() {
    const q = new URLSearchParams();
    const set = function (k, v) { if (v) q.set(k, v); };
    set('batch', $('rf-batch').value.trim());
    set('unit', $('rf-unit').value.trim());
    set('state', $('rf-state').value);
    set('from', $('rf-from').value);
    set('to', $('rf-to').value);
    q.set('limit', String(RUN_PAGE));
    if (runsView.offset) q.set('offset', String(runsView.offset));
    return q.toString();
  }
  async function refreshRuns(asked) {
    try {
      const r = await api('GET', '/api/runs?' + runsQuery());
      state.runs = r.runs || [];
      state.runsTotal = r.total;
      runsView.next = typeof r.next_offset === 'number' ? r.next_offset : null;
      $('runs-page').textContent = r.total
        ? 'runs ' + (r.offset + 1) + '–' + (r.offset + state.runs.length) + ' of ' + r.total : 'no runs';
      $('runs-newer').disabled = r.offset === 0;
      $('runs-older').disabled = runsView.next === null;
      renderRuns();
    } catch (e) {
      if (asked === true) notice('run list: ' + e.message, 'bad'); // else keep the last list
    }
    refreshBatch();
  }

  // The batch filtered on: its yield and the overlay of its finished
  // units with the mask, drawn by the daemon.
  async function refreshBatch() {
    const b = $('rf-batch').value.trim();
    const box = $('batch-box');
    if (!b) { box.hidden = true; runsView.batch = ''; return; }
    let v;
    try { v = await api('GET', '/api/batches/' + encodeURIComponent(b)); }
    catch (e) { box.hidden = true; return; }
    box.hidden = false;
    $('batch-summary').textContent = 'batch ' + b + ': ' + v.units + ' units in ' + v.runs + ' runs; ' +
      (typeof v.yield === 'number'
        ? 'yield ' + (100 * v.yield).toFixed(1) + ' % (' + v.units_passed + ' of ' + (v.units_passed + v.units_failed) + ' units pass the mask)'
        : 'none checked against a mask');
    const img = $('batch-img');
    // The overlay is drawn again only when the batch has new finished runs.
    const key = b + '/' + v.done;
    if (!v.done || runsView.batch === key) { img.hidden = !v.done; return; }
    try {
      const blob = await fetchBlob('/api/batches/' + encodeURIComponent(b) + '/overlay.png');
      if (img.src) URL.revokeObjectURL(img.src);
      img.src = URL.createObjectURL(blob);
      img.hidden = false;
      runsView.batch = key;
    } catch (e) { img.hidden = true; }
  }
  $('runs-filter').addEventListener('submit', function (ev) { ev.preventDefault(); runsView.offset = 0; refreshRuns(true); });
  $('runs-newer').addEventListener('click', function () { runsView.offset = Math.max(0, runsView.offset - RUN_PAGE); refreshRuns(true); });
  $('runs-older').addEventListener('click', function () { if (runsView.next !== null) { runsView.offset = runsView.next; refreshRuns(true); } });

  const selected = new Set();
  const EXPORTS = ['response.csv', 'result.json', 'response.png', 'response.svg', 'response.pdf'];

  function renderRuns() {
    const tb = $('runs-body');
    tb.textContent = '';
    for (const run of state.runs) {
      const tr = document.createElement('tr');
      tr.dataset.id = run.id;
      if (run.id === state.runId) tr.className = 'current';
      const td = function (content, cls) {
        const c = document.createElement('td');
        if (cls) c.className = cls;
        if (content instanceof Node) c.appendChild(content); else c.textContent = content;
        tr.appendChild(c);
        return c;
      };
      const cb = document.createElement('input');
      cb.type = 'checkbox';
      cb.checked = selected.has(run.id);
      cb.disabled = !run.points;
      cb.title = 'include in the overlay';
      cb.addEventListener('change', function () { if (cb.checked) selected.add(run.id); else selected.delete(run.id); $('btn-overlay').disabled = selected.size === 0; });
      td(cb);
      td(run.id, 'id');
      td(run.name || '');
      const st = document.createElement('span');
      st.className = 'state'; st.dataset.state = run.state; st.textContent = run.state + (run.queue_position ? ' #' + run.queue_position : '');
      td(st);
      td(String(run.points || 0));
      const mk = cornersOf(run.result);
      td(mk && mk.corners.length ? mk.corners.map(cornerText).join(' · ') : '–');
      const ex = document.createElement('span');
      if (run.state === 'done') {
        for (const name of EXPORTS) {
          const a = document.createElement('a');
          a.className = 'dl'; a.href = '#'; a.textContent = name.split('.').pop().toUpperCase();
          a.title = 'download ' + name;
          a.dataset.file = name;
          a.addEventListener('click', function (e) { e.preventDefault(); download(run.id, name); });
          ex.appendChild(a);
        }
      }
      td(ex);
      const act = document.createElement('span');
      const view = document.createElement('button');
      view.className = 'secondary'; view.textContent = 'view';
      view.addEventListener('click', function () { follow(run.id); });
      act.appendChild(view);
      if (run.state === 'interrupted') {
        const rs = document.createElement('button');
        rs.className = 'secondary'; rs.textContent = 'resume'; rs.style.marginLeft = '.3rem';
        rs.addEventListener('click', async function () {
          try { await api('POST', '/api/runs/' + encodeURIComponent(run.id) + '/resume', {}); follow(run.id); refreshRuns(); }
          catch (e) { notice('resume: ' + e.message, 'bad'); }
        });
        act.appendChild(rs);
      }
      td(act);
      tb.appendChild(tr);
    }
    $('btn-overlay').disabled = selected.size === 0;
  }

  // Downloads and images go through fetch so that the token header is sent.
  async function fetchBlob(path) {
    const r = await fetch(path, { headers: headers(false), cache: 'no-store' });
    if (!r.ok) {
      let msg = r.status + ' ' + r.statusText;
      try { msg = (await r.json()).error || msg; } catch (e) { /* not JSON */ }
      throw new Error(msg);
    }
    return r.blob();
  }

  async function download(id, name) {
    try {
      const blob = await fetchBlob('/api/runs/' + encodeURIComponent(id) + '/files/' + name);
      const url = URL.createObjectURL(blob);
      const a = document.createElement('a');
      a.href = url; a.download = id + '-' + name;
      document.body.appendChild(a); a.click(); a.remove();
      setTimeout(function () { URL.revokeObjectURL(url); }, 60000);
    } catch (e) { notice('download ' + name + ': ' + e.message, 'bad'); }
  }

  $('btn-overlay').addEventListener('click', async function () {
    const ids = Array.from(selected);
    if (!ids.length) return;
    const q = '/api/overlay.png?runs=' + ids.map(encodeURIComponent).join(',') + ($('ov-diff').checked ? '&diff=1' : '');
    try {
      const blob = await fetchBlob(q);
      const img = $('overlay-img');
      if (img.src) URL.revokeObjectURL(img.src);
      img.src = URL.createObjectURL(blob);
      $('overlay').hidden = false;
    } catch (e) { notice('overlay: ' + e.message, 'bad'); }
  });
  $('btn-refresh').addEventListener('click', function () { refreshRuns(true); });

  // --- start
  (async function () {
    await loadBench();
    await refreshRuns();
    // Follow the run on the bench, or else show the newest one.
    const live = state.runs.find(function (r) { return r.live || LIVE.indexOf(r.state) >= 0; });
    const pick = live || state.runs[0];
    if (pick) follow(pick.id);
    setInterval(refreshRuns, 5000);
  })();
})();

// line.js: the production-line page. The operator types or scans a serial
// number (a scanner types it and presses Enter); the unit is measured with
// the plan kept in this browser, its verdict shown large, and the field is
// ready for the next unit.
'use strict';
(function () {
  const $ = function (id) { return document.getElementById(id); };
  const FINAL = ['done', 'aborted', 'failed', 'interrupted'];
  const DEFAULT_PLAN = {
    name: 'line test',
    frequencies: { spacing: 'log', start_hz: 20, stop_hz: 100000, points_per_decade: 5 },
    level: { vrms: 0.05 },
    ranging: { strategy: 'fixed' },
    reference_hz: 1000,
  };

  let token = document.querySelector('meta[name=rolloff-token]').content || '';
  const needToken = document.querySelector('meta[name=rolloff-need-token]').content === '1';
  try {
    if (token) sessionStorage.setItem('rolloff-token', token);
    else token = sessionStorage.getItem('rolloff-token') || '';
  } catch (e) { /* storage disabled */ }
  if (location.search.indexOf('once=') >= 0) history.replaceState(null, '', '/line');
  if (needToken && !token) $('token-banner').hidden = false;

  const state = { runId: null, busy: false, last: null };
  window.rolloffLine = state; // for tests

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
    if (!r.ok) throw new Error((data && data.error) || (r.status + ' ' + r.statusText));
    return data;
  }

  function load(key, fallback) {
    try { return localStorage.getItem(key) || fallback; } catch (e) { return fallback; }
  }
  function save(key, v) {
    try { localStorage.setItem(key, v); } catch (e) { /* storage disabled */ }
  }

  $('plan').value = load('rolloff-line-plan', JSON.stringify(DEFAULT_PLAN, null, 2));
  $('batch').value = load('rolloff-line-batch', '');
  $('f-batch').value = $('batch').value;

  function fmtDB(v) {
    if (typeof v !== 'number') return '—';
    return (v >= 0 ? '+' : '−') + Math.abs(v).toFixed(2) + ' dB';
  }
  function fmtHz(v) {
    if (typeof v !== 'number') return '';
    if (v >= 1e6) return (v / 1e6).toPrecision(4) + ' MHz';
    if (v >= 1e3) return (v / 1e3).toPrecision(4) + ' kHz';
    return v.toPrecision(4) + ' Hz';
  }

  // verdictOf reads a run's verdict from its info: pass, fail, no mask or
  // the state it ended in.
  function verdictOf(info) {
    const res = info.result;
    if (info.state !== 'done') return { word: info.state.toUpperCase(), kind: 'fail' };
    if (!res) return { word: 'NO FIGURES', kind: 'fail' };
    const m = res.mask;
    if (!m) return { word: 'NO MASK', kind: 'idle' };
    const detail = m.worst_margin_db !== null && m.worst_margin_db !== undefined
      ? 'worst margin ' + fmtDB(m.worst_margin_db) + ' at ' + fmtHz(m.worst_hz) + ' (' + m.worst_limit + ' limit)' : '';
    return { word: m.pass ? 'PASS' : 'FAIL', kind: m.pass ? 'pass' : 'fail', detail: detail, margin: m.worst_margin_db };
  }

  function show(word, kind, unit, detail) {
    const v = $('verdict');
    v.textContent = word;
    v.className = 'verdict ' + kind;
    $('verdict-unit').textContent = unit || '';
    $('verdict-detail').textContent = detail || '';
  }

  const sleep = function (ms) { return new Promise(function (r) { setTimeout(r, ms); }); };

  async function measure(serial) {
    let plan;
    try {
      plan = JSON.parse($('plan').value);
    } catch (e) {
      throw new Error('the plan is not valid JSON: ' + e.message);
    }
    plan.unit = serial;
    const batch = $('batch').value.trim();
    if (batch) plan.batch = batch; else delete plan.batch;
    save('rolloff-line-plan', $('plan').value);
    save('rolloff-line-batch', batch);
    show('measuring…', 'busy', serial, '');
    $('verdict-report').hidden = true;
    const created = await api('POST', '/api/runs', plan);
    state.runId = created.id;
    let info;
    for (;;) {
      info = await api('GET', '/api/runs/' + encodeURIComponent(created.id));
      if (FINAL.indexOf(info.state) >= 0) break;
      if (info.progress && typeof info.progress.done === 'number') {
        $('verdict-detail').textContent = info.progress.done + ' of ' + info.progress.total + ' points';
      }
      await sleep(400);
    }
    const v = verdictOf(info);
    state.last = { id: created.id, unit: serial, verdict: v.word };
    show(v.word, v.kind, serial, v.detail || info.message || '');
    $('verdict-report').hidden = info.state !== 'done';
  }

  $('unit-form').addEventListener('submit', async function (ev) {
    ev.preventDefault();
    const serial = $('serial').value.trim();
    if (!serial || state.busy) return;
    state.busy = true;
    $('start').disabled = true;
    $('line-error').textContent = '';
    try {
      await measure(serial);
    } catch (e) {
      $('line-error').textContent = e.message;
      show('ERROR', 'fail', serial, '');
    } finally {
      state.busy = false;
      $('start').disabled = false;
      $('serial').value = '';
      $('serial').focus();
      refresh();
    }
  });

  // The report is fetched with the token and opened from memory.
  $('verdict-report').addEventListener('click', async function (ev) {
    ev.preventDefault();
    if (!state.runId) return;
    const r = await fetch('/api/runs/' + encodeURIComponent(state.runId) + '/files/report.pdf', { headers: headers(false), cache: 'no-store' });
    if (!r.ok) { $('line-error').textContent = 'report.pdf: ' + r.status; return; }
    window.open(URL.createObjectURL(await r.blob()), '_blank');
  });

  const PAGE = 50;
  let offset = 0;
  async function refresh() {
    const q = new URLSearchParams();
    if ($('f-batch').value.trim()) q.set('batch', $('f-batch').value.trim());
    if ($('f-unit').value.trim()) q.set('unit', $('f-unit').value.trim());
    q.set('limit', String(PAGE));
    if (offset) q.set('offset', String(offset));
    let page, runs;
    try {
      page = await api('GET', '/api/runs?' + q.toString());
      runs = page.runs;
    } catch (e) {
      $('line-error').textContent = e.message;
      return;
    }
    $('page-info').textContent = page.total
      ? 'runs ' + (page.offset + 1) + '–' + (page.offset + runs.length) + ' of ' + page.total : 'no runs';
    $('newer').disabled = page.offset === 0;
    $('older').disabled = page.next_offset === undefined || page.next_offset === null;
    state.next = page.next_offset;
    const body = $('history').querySelector('tbody');
    body.textContent = '';
    let checked = 0, passed = 0;
    runs.forEach(function (info) {
      const v = FINAL.indexOf(info.state) >= 0 ? verdictOf(info) : { word: '…' };
      if (v.word === 'PASS' || v.word === 'FAIL') {
        checked++;
        if (v.word === 'PASS') passed++;
      }
      const tr = document.createElement('tr');
      const plan = info.plan || {};
      [plan.unit || '—', plan.batch || '—', info.state, v.word, fmtDB(v.margin), info.id].forEach(function (t) {
        const td = document.createElement('td');
        td.textContent = t;
        tr.appendChild(td);
      });
      body.appendChild(tr);
    });
    $('yield').textContent = checked
      ? 'yield ' + (100 * passed / checked).toFixed(1) + ' % (' + passed + ' of ' + checked + ' units checked against a mask pass; ' + runs.length + ' runs listed)'
      : runs.length + ' runs listed, none checked against a mask';
    state.listed = runs.length;
    overlay(runs);
    batchView();
  }

  // batchView shows the batch filtered on (or, without a filter, the
  // batch being measured): its yield over every unit, not only those
  // listed, and the overlay of its finished units with the mask.
  let batchURL = null;
  async function batchView() {
    const b = $('f-batch').value.trim() || $('batch').value.trim();
    const box = $('batch-view');
    if (!b) { box.hidden = true; state.batch = null; return; }
    let v;
    try {
      v = await api('GET', '/api/batches/' + encodeURIComponent(b));
    } catch (e) {
      box.hidden = true;
      state.batch = null;
      return;
    }
    box.hidden = false;
    $('batch-name').textContent = b;
    const units = v.units + (v.units === 1 ? ' unit' : ' units') + ', ' + v.runs + (v.runs === 1 ? ' run' : ' runs');
    $('batch-yield').textContent = typeof v.yield === 'number'
      ? 'yield ' + (100 * v.yield).toFixed(1) + ' % (' + v.units_passed + ' of ' + (v.units_passed + v.units_failed) +
        ' units pass, each by its newest run; ' + units + ')'
      : units + ', none checked against a mask';
    state.batch = v;
    const img = $('batch-overlay');
    if (!v.done) { img.hidden = true; return; }
    const r = await fetch('/api/batches/' + encodeURIComponent(b) + '/overlay.png', { headers: headers(false), cache: 'no-store' });
    if (!r.ok) { img.hidden = true; return; }
    if (batchURL) URL.revokeObjectURL(batchURL);
    batchURL = URL.createObjectURL(await r.blob());
    img.src = batchURL;
    img.hidden = false;
    state.batchOverlaid = v.done;
  }

  // overlay shows the responses of the most recent finished units listed
  // (as many as the daemon overlays at once), fetched with the token.
  let overlayURL = null;
  async function overlay(runs) {
    const ids = runs.filter(function (r) { return r.state === 'done'; }).slice(0, 8).map(function (r) { return r.id; });
    const img = $('overlay');
    if (!ids.length) { img.hidden = true; return; }
    const r = await fetch('/api/overlay.png?runs=' + ids.map(encodeURIComponent).join(','), { headers: headers(false), cache: 'no-store' });
    if (!r.ok) { img.hidden = true; return; }
    if (overlayURL) URL.revokeObjectURL(overlayURL);
    overlayURL = URL.createObjectURL(await r.blob());
    img.src = overlayURL;
    img.hidden = false;
    state.overlaid = ids.length;
  }

  $('filter-form').addEventListener('submit', function (ev) { ev.preventDefault(); offset = 0; refresh(); });
  $('newer').addEventListener('click', function () { offset = Math.max(0, offset - PAGE); refresh(); });
  $('older').addEventListener('click', function () { if (typeof state.next === 'number') { offset = state.next; refresh(); } });
  refresh();
  $('serial').focus();
})();

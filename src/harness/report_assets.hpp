// The fixed parts of the HTML reports: style sheet, error trap, cautions and the drawing scripts
// (src/harness/report_pages.cpp puts them around each report's data). Internal.
//
// The scripts read the data from the JSON block, draw with Chart.js and fill the tables with
// textContent (never innerHTML), so no value of the data is ever parsed as HTML. When every chart
// has drawn, <body> gets data-state="drawn" and each canvas data-drawn="yes" with data-ink = the
// number of painted pixels; any script error is written into #report-errors and counted in
// <body data-errors>. The browser tests read these marks.
#pragma once

namespace alphaledger::report_assets {

// Okabe & Ito's colour-blind safe palette; each series also has its own dash and marker shape.
inline constexpr const char* kCss = R"CSS(
:root { --ink: #1a1a1a; --muted: #555; --rule: #d0d0d0; --warn: #D55E00; --note: #E69F00; }
* { box-sizing: border-box; }
body { font-family: system-ui, -apple-system, "Segoe UI", Roboto, "DejaVu Sans", sans-serif; color: var(--ink);
       max-width: 1100px; margin: 0 auto; padding: 1rem 1.25rem 3rem; line-height: 1.45; background: #fff; }
h1 { font-size: 1.6rem; margin: .5rem 0 .2rem; overflow-wrap: anywhere; }
h2 { font-size: 1.25rem; margin-top: 2rem; border-bottom: 1px solid var(--rule); padding-bottom: .2rem; }
h3 { font-size: 1.05rem; margin: .5rem 0; }
.sub, figcaption, .note, footer { color: var(--muted); }
figcaption { font-size: .9rem; margin-top: .3rem; }
figure.chart { margin: 1rem 0 1.5rem; }
.canvas-box { position: relative; height: 360px; width: 100%; }
table { border-collapse: collapse; font-size: .85rem; }
th, td { border-bottom: 1px solid var(--rule); padding: .2rem .55rem; text-align: left; vertical-align: top; }
td { white-space: nowrap; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
td.wrap { white-space: normal; min-width: 16rem; }
thead th { position: sticky; top: 0; background: #f4f4f4; }
table.facts th { width: 11rem; color: var(--muted); font-weight: normal; }
table.facts td { white-space: normal; }
.table-box { max-height: 34rem; overflow: auto; border: 1px solid var(--rule); }
.mark-r { font-weight: bold; }
.above { color: var(--warn); font-weight: bold; }
button { margin: .4rem .4rem .4rem 0; font: inherit; }
/* A script error paints a banner of one fixed colour at the top, so that even a screenshot shows it
   (tests/cli/test_report_cli.cpp looks for this colour in Firefox's screenshots). */
#report-errors { background: #c00000; color: #fff; font-weight: bold; min-height: 5rem;
                 padding: .6rem .9rem; margin: .5rem 0; }
#cautions { border-left: 5px solid var(--note); padding: .1rem 1rem; margin-top: 2rem; background: #fffaf0; }
code { font-size: .9em; }
@media print {
  body { max-width: none; padding: 0; font-size: 10pt; }
  .table-box { max-height: none; overflow: visible; border: none; }
  thead th { position: static; }
  table { font-size: 7.5pt; }
  td { white-space: normal; overflow-wrap: anywhere; }
  button, label input { display: none; }
  figure.chart, #cautions, table.facts { break-inside: avoid; }
  h2 { break-after: avoid; }
  /* The charts were drawn for the screen: scale the drawn bitmap to the page instead of redrawing. */
  .canvas-box { height: auto; }
  canvas { max-width: 100% !important; height: auto !important; }
}
)CSS";

inline constexpr const char* kErrorTrap = R"HTML(<div id="report-errors" role="alert" hidden></div>
<script>
(function () {
  var count = 0;
  function record(text) {
    count += 1;
    document.body.setAttribute('data-errors', String(count));
    var box = document.getElementById('report-errors');
    box.hidden = false;
    var p = document.createElement('p');
    p.textContent = 'This page hit a script error, so some charts may be missing: ' + text;
    box.appendChild(p);
  }
  window.reportError = record;
  window.addEventListener('error', function (e) {
    record(String(e.message) + (e.lineno ? ' (line ' + e.lineno + ')' : ''));
  });
  window.addEventListener('unhandledrejection', function (e) { record(String(e.reason)); });
  // The error handlers above do not see an exception thrown while Chart.js draws inside a callback
  // that catches it; a page that never finished drawing is reported as well.
  window.addEventListener('load', function () {
    if (document.body.getAttribute('data-state') !== 'drawn') record('the charts did not finish drawing');
  });
})();
</script>
)HTML";

inline constexpr const char* kCautions = R"HTML(<section id="cautions">
<h2>Before you act on this</h2>
<ul>
<li>The guarantees are those of the published rules and hold only under their conditions: LORD++, SAFFRON
and ADDIS assume null p-values independent of everything else (ADDIS also conservative nulls);
alpha-investing gives mFDR, not FDR; only alpha-spending (FWER) holds under any dependence.</li>
<li>A p-value must be valid. Peeking at a running experiment and stopping when it looks good breaks that,
and no online rule can repair it.</li>
<li>Where decisions affect people's health or safety (clinical studies, safety monitoring), this report and
alphaledger do <strong>not</strong> replace a pre-registered analysis plan, a qualified statistician, or
the rules of your local regulator. alphaledger implements published procedures as documented; it cannot
know whether your p-values are valid or your tests independent.</li>
</ul>
</section>
)HTML";

inline constexpr const char* kCommonScript = R"JS(
'use strict';
var DATA = JSON.parse(document.getElementById('report-data').textContent);
var COLORS = ['#0072B2', '#E69F00', '#009E73', '#CC79A7', '#D55E00', '#56B4E9', '#000000', '#F0E442'];
var SHAPES = ['circle', 'triangle', 'rect', 'rectRot', 'star', 'crossRot', 'rectRounded', 'cross'];
var DASHES = [[], [8, 4], [2, 3], [12, 4, 2, 4], [5, 5], [16, 5], [1, 4], [8, 2, 2, 2, 2, 2]];
var PAGE_ROWS = 1000;
var charts = [];

function style(k) {
  return { color: COLORS[k % COLORS.length], shape: SHAPES[k % SHAPES.length], dash: DASHES[k % DASHES.length] };
}
// ---- The data block's column forms (src/harness/report_encode.hpp; docs/reports.md) ----------
// Exact: doubles come back bit for bit from their binary64 bytes.
var BASE64 = 'ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/';
function decodeF64(text) {
  var bin = atob(text), n = bin.length >> 3, out = new Array(n);
  var view = new DataView(new ArrayBuffer(8));
  for (var i = 0; i < n; i++) {
    for (var b = 0; b < 8; b++) view.setUint8(b, bin.charCodeAt(8 * i + b));
    out[i] = view.getFloat64(0, true);
  }
  return out;
}
function numbers(c, ref) {
  if (c === null || c === undefined || Array.isArray(c)) return c;
  var out = new Array(c.count), i;
  if ('same' in c) { for (i = 0; i < c.count; i++) out[i] = c.same; return out; }
  var written = decodeF64(c.f64);
  if (!('codes' in c)) return written;
  var next = 0, row = 0, prev = c.before, re = /([a-z])(\d*)/g, m;
  while ((m = re.exec(c.codes)) !== null) {
    var times = m[2] ? parseInt(m[2], 10) : 1;
    for (var k = 0; k < times; k++, row++) {
      if (m[1] === 'x') prev = written[next++];
      else if (m[1] === 'l') prev = prev - ref[row] / c.divisor;
      out[row] = prev;
    }
  }
  return out;
}
function integers(c) {
  if (c === null || c === undefined || Array.isArray(c)) return c;
  var out = new Array(c.count), v = c.first, large = 0;
  for (var i = 0; i < c.count; i++) {
    if (i > 0 && 'every' in c) v += c.every;
    if (i > 0 && 'diffs' in c) v += c.diffs[i - 1];
    if (i > 0 && 'small_diffs' in c) {
      var digit = BASE64.indexOf(c.small_diffs.charAt(i - 1));
      v += digit === 63 ? c.large[large++] : digit;
    }
    out[i] = v;
  }
  return out;
}
function flags(c) {
  if (c === null || c === undefined || Array.isArray(c)) return c;
  var out = new Array(c.count).fill(0);
  c.set.forEach(function (i) { out[i] = 1; });
  return out;
}
function texts(c) {
  if (c === null || c === undefined || Array.isArray(c)) return c;
  var out = new Array(c.count), i;
  if ('values' in c) {
    for (i = 0; i < c.count; i++) out[i] = c.values[BASE64.indexOf(c.index.charAt(i))];
    return out;
  }
  var pos = 0, prev = '';
  for (i = 0; i < c.count; i++) {
    var rest = c.front.charCodeAt(pos + 1) - 48;
    prev = prev.slice(0, c.front.charCodeAt(pos) - 48) + c.front.substr(pos + 2, rest);
    out[i] = prev;
    pos += 2 + rest;
  }
  return out;
}
// Full precision: JavaScript's shortest text that reads back to the same number.
function full(v) { return v === null || v === undefined ? '' : String(v); }
function rounded(v, digits) {
  if (v === null || v === undefined) return '';
  if (typeof v !== 'number') return String(v);
  return Number(v.toPrecision(digits || 4)).toString();
}
function isoTime(ms) { return ms ? new Date(ms).toISOString() : ''; }

// Counts the painted pixels of a canvas and marks it, for people checking the page and for tests.
function markDrawn(chart) {
  var c = chart.canvas;
  var ink = 0;
  try {
    var img = c.getContext('2d').getImageData(0, 0, c.width, c.height).data;
    for (var i = 3; i < img.length; i += 4 * 7) if (img[i] !== 0) ink += 1;
  } catch (e) { ink = -1; }
  c.setAttribute('data-drawn', 'yes');
  c.setAttribute('data-ink', String(ink));
}
Chart.register({ id: 'alphaledgerDrawn', afterRender: markDrawn });
Chart.defaults.animation = false;
Chart.defaults.maintainAspectRatio = false;
Chart.defaults.font.family = getComputedStyle(document.body).fontFamily;
Chart.defaults.color = '#1a1a1a';
Chart.defaults.plugins.legend.labels.usePointStyle = true;
window.addEventListener('beforeprint', function () { charts.forEach(function (c) { c.resize(); }); });

function makeChart(id, config) {
  var chart = new Chart(document.getElementById(id), config);
  charts.push(chart);
  return chart;
}

// A table of `rows` (indices or objects) with columns {title, value(row), num, cls(row)}; shows
// PAGE_ROWS rows, then a button for the rest. Cells are filled with textContent only.
function renderTable(box, columns, rows, caption) {
  box.textContent = '';
  var table = document.createElement('table');
  if (caption) {
    var cap = document.createElement('caption');
    cap.textContent = caption;
    table.appendChild(cap);
  }
  var head = table.createTHead().insertRow();
  columns.forEach(function (col) {
    var th = document.createElement('th');
    th.scope = 'col';
    th.textContent = col.title;
    head.appendChild(th);
  });
  var tbody = table.createTBody();
  var shown = 0;
  function more(limit) {
    var frag = document.createDocumentFragment();
    var end = Math.min(rows.length, shown + limit);
    for (; shown < end; shown++) {
      var tr = document.createElement('tr');
      var row = rows[shown];
      for (var c = 0; c < columns.length; c++) {
        var td = document.createElement('td');
        td.textContent = columns[c].value(row);
        var cls = columns[c].num ? 'num' : (columns[c].cls || '');
        if (columns[c].mark) cls += ' ' + (columns[c].mark(row) || '');
        if (cls) td.className = cls;
        tr.appendChild(td);
      }
      frag.appendChild(tr);
    }
    tbody.appendChild(frag);
  }
  more(PAGE_ROWS);
  box.appendChild(table);
  if (shown < rows.length) {
    var note = document.createElement('p');
    note.className = 'note';
    var button = document.createElement('button');
    button.type = 'button';
    function label() { note.firstChild.textContent = 'Showing ' + shown + ' of ' + rows.length + ' rows. '; }
    note.appendChild(document.createTextNode(''));
    button.textContent = 'Show all rows';
    button.addEventListener('click', function () { more(rows.length); label(); button.remove(); });
    note.appendChild(button);
    label();
    box.appendChild(note);
  }
}

function thinningNote(drawn, total) {
  if (drawn >= total) return;
  var p = document.getElementById('thinning-note');
  p.hidden = false;
  p.textContent = 'The charts draw ' + drawn + ' of the ' + total + ' tests: every discovery, the first and the last, ' +
      'and evenly spaced others. The tables below and the embedded data hold every test.';
}

// The button at the end of the page: the data with every column decoded into a plain array.
function offerSave(plain) {
  var button = document.getElementById('save-data');
  button.hidden = false;
  button.addEventListener('click', function () {
    var blob = new Blob([JSON.stringify(plain)], { type: 'application/json' });
    var a = document.createElement('a');
    a.href = URL.createObjectURL(blob);
    a.download = DATA.report + '-data.json';
    document.body.appendChild(a);
    a.click();
    a.remove();
  });
}

function finish() {
  document.body.setAttribute('data-charts', String(charts.length));
  document.body.setAttribute('data-state', 'drawn');
}

// Vertical error bars from dataset.errorBars[k] = [low, high] (simulation report).
Chart.register({
  id: 'alphaledgerErrorBars',
  afterDatasetsDraw: function (chart) {
    var ctx = chart.ctx;
    var y = chart.scales.y;
    chart.data.datasets.forEach(function (ds, i) {
      if (!ds.errorBars || !chart.isDatasetVisible(i)) return;
      var meta = chart.getDatasetMeta(i);
      ctx.save();
      ctx.strokeStyle = ds.borderColor;
      ctx.lineWidth = 1.5;
      ctx.setLineDash([]);
      meta.data.forEach(function (el, k) {
        var bar = ds.errorBars[k];
        if (!bar || bar[0] === null || bar[1] === null || !isFinite(bar[0]) || !isFinite(bar[1])) return;
        var lo = y.getPixelForValue(bar[0]), hi = y.getPixelForValue(bar[1]);
        ctx.beginPath();
        ctx.moveTo(el.x, lo); ctx.lineTo(el.x, hi);
        ctx.moveTo(el.x - 4, lo); ctx.lineTo(el.x + 4, lo);
        ctx.moveTo(el.x - 4, hi); ctx.lineTo(el.x + 4, hi);
        ctx.stroke();
      });
      ctx.restore();
    });
  }
});
)JS";

inline constexpr const char* kStreamScript = R"JS(
// The decisions decoded into plain arrays, and the discoveries so far after each.
function streamColumns() {
  var E = DATA.decisions;
  var D = { step: integers(E.step), id: texts(E.id), p_value: numbers(E.p_value), level: numbers(E.level),
            rejected: flags(E.rejected), decided_at_ms: integers(E.decided_at_ms) };
  D.wealth = numbers(E.wealth, D.level);
  D.found = new Array(D.step.length);
  for (var i = 0, so_far = 0; i < D.step.length; i++) { so_far += D.rejected[i]; D.found[i] = so_far; }
  return D;
}

// p-values against their levels, on a log scale (0 drawn at the bottom).
function levelsChart(D, stepAxis) {
  var n = D.step.length;
  var floor = 1;
  for (var i = 0; i < n; i++) {
    if (D.p_value[i] > 0 && D.p_value[i] < floor) floor = D.p_value[i];
    if (D.level[i] > 0 && D.level[i] < floor) floor = D.level[i];
  }
  floor = floor / 10;
  function tip(ctx) {
    var k = ctx.raw.i;
    return ['id: ' + D.id[k], 'step: ' + D.step[k], 'p-value: ' + full(D.p_value[k]), 'level: ' + full(D.level[k]),
            D.rejected[k] ? 'discovery' : 'not rejected'];
  }
  var plain = [], found_points = [], levels = [];
  DATA.drawn.forEach(function (k) {
    var point = { x: D.step[k], y: Math.max(D.p_value[k], floor), i: k };
    (D.rejected[k] ? found_points : plain).push(point);
    levels.push({ x: D.step[k], y: Math.max(D.level[k], floor), i: k });
  });
  makeChart('chart-levels', {
    type: 'scatter',
    data: { datasets: [
      { label: 'p-value, not rejected', data: plain, pointStyle: 'circle', borderColor: COLORS[0],
        backgroundColor: 'rgba(0,0,0,0)', pointRadius: n > 2000 ? 1.5 : 3 },
      { label: 'p-value, discovery', data: found_points, pointStyle: 'triangle', borderColor: COLORS[4],
        backgroundColor: COLORS[4], pointRadius: 6 },
      { label: 'level', data: levels, showLine: true, borderColor: '#000000', borderDash: [6, 3], borderWidth: 1.5,
        pointRadius: 0, pointStyle: 'line', backgroundColor: '#000000' } ] },
    options: { parsing: false, scales: { x: stepAxis,
      y: { type: 'logarithmic', title: { display: true, text: 'p-value and level (log scale)' },
           ticks: { callback: function (v) {
             var e = Math.log10(v);
             return Math.abs(e - Math.round(e)) < 1e-9 ? (e >= -3 ? String(v) : '1e' + Math.round(e)) : ''; } } } },
      plugins: { tooltip: { callbacks: { label: tip } } } }
  });
}

// Alpha-wealth and reserved wealth after each test, and the discoveries so far.
function wealthCharts(D, R, stepAxis) {
  var wealth = [], count = [], reserved = [], found = D.found;
  DATA.drawn.forEach(function (k) {
    wealth.push({ x: D.step[k], y: D.wealth[k], i: k });
    if (R) reserved.push({ x: D.step[k], y: R[k], i: k });
    count.push({ x: D.step[k], y: found[k], i: k });
  });
  makeChart('chart-wealth', {
    type: 'scatter',
    data: { datasets: [ { label: 'alpha-wealth after the test', data: wealth, showLine: true, borderColor: COLORS[0],
      backgroundColor: COLORS[0], pointRadius: 0, pointStyle: 'line', borderWidth: 2 },
      { label: 'reserved by running tests', data: reserved, showLine: true, borderColor: COLORS[5],
        backgroundColor: COLORS[5], borderDash: [8, 4], pointRadius: 0, pointStyle: 'line', borderWidth: 2 } ] },
    options: { parsing: false, scales: { x: stepAxis, y: { title: { display: true, text: 'alpha-wealth' } } },
      plugins: { tooltip: { callbacks: { label: function (ctx) {
        var k = ctx.raw.i;
        return ctx.datasetIndex === 0 ? ['id: ' + D.id[k], 'wealth: ' + full(D.wealth[k])]
                                      : ['after ' + D.id[k], 'reserved: ' + full(R[k])]; } } } } }
  });
  makeChart('chart-discoveries', {
    type: 'scatter',
    data: { datasets: [ { label: 'discoveries so far', data: count, showLine: true, stepped: true,
      borderColor: COLORS[2], backgroundColor: COLORS[2], borderWidth: 2,
      pointRadius: count.map(function (pt) { return D.rejected[pt.i] ? 5 : 0; }), pointStyle: 'triangle' } ] },
    options: { parsing: false, scales: { x: stepAxis,
      y: { beginAtZero: true, title: { display: true, text: 'discoveries' }, ticks: { precision: 0 } } },
      plugins: { tooltip: { callbacks: { label: function (ctx) {
        return ['after ' + D.id[ctx.raw.i], 'discoveries: ' + found[ctx.raw.i]]; } } } } }
  });
}

// The tables of decisions and of running tests; returns the running tests decoded.
function streamTables(D, R) {
  var n = D.step.length, found = D.found, i;
  var all = [];
  for (i = 0; i < n; i++) all.push(i);
  var columns = [
    { title: 'step', num: true, value: function (k) { return String(D.step[k]); } },
    { title: 'id', cls: 'id', value: function (k) { return D.id[k]; } },
    { title: 'p_value', num: true, value: function (k) { return full(D.p_value[k]); } },
    { title: 'level', num: true, value: function (k) { return full(D.level[k]); } },
    { title: 'decision', value: function (k) { return D.rejected[k] ? 'DISCOVERY' : 'not rejected'; },
      mark: function (k) { return D.rejected[k] ? 'mark-r' : ''; } },
    { title: 'wealth', num: true, value: function (k) { return full(D.wealth[k]); } },
    { title: 'reserved', num: true, value: function (k) { return R ? full(R[k]) : ''; } },
    { title: 'discoveries', num: true, value: function (k) { return String(found[k]); } },
    { title: 'decided_at', value: function (k) { return isoTime(D.decided_at_ms[k]); } } ];
  var box = document.getElementById('decisions-table');
  function table(only) {
    renderTable(box, columns, only ? all.filter(function (k) { return D.rejected[k]; }) : all,
                'Decisions of stream ' + DATA.stream);
  }
  table(false);
  var V = DATA.running;
  var U = { id: texts(V.id), launch: integers(V.launch), level: numbers(V.level),
            launched_at_ms: integers(V.launched_at_ms) };
  if (U.id.length) {
    var urows = [];
    for (i = 0; i < U.id.length; i++) urows.push(i);
    renderTable(document.getElementById('running-table'), [
      { title: 'launch', num: true, value: function (k) { return String(U.launch[k]); } },
      { title: 'id', cls: 'id', value: function (k) { return U.id[k]; } },
      { title: 'reserved level', num: true, value: function (k) { return full(U.level[k]); } },
      { title: 'launched_at', value: function (k) { return isoTime(U.launched_at_ms[k]); } } ],
      urows, 'Running tests of stream ' + DATA.stream);
  }
  document.getElementById('only-discoveries').addEventListener('change', function (e) { table(e.target.checked); });
  return U;
}

(function () {
  var D = streamColumns();
  var R = numbers(DATA.reserved_wealth);
  var n = D.step.length;
  var stepAxis = { type: 'linear', title: { display: true, text: 'step (test number in the stream)' },
                   min: n ? D.step[0] : 0, max: n ? D.step[n - 1] : 1 };
  levelsChart(D, stepAxis);
  wealthCharts(D, R, stepAxis);
  thinningNote(DATA.drawn.length, n);
  var U = streamTables(D, R);
  var decisions = Object.assign({}, D);
  delete decisions.found;
  offerSave(Object.assign({}, DATA, { decisions: decisions, reserved_wealth: R, running: U }));
  finish();
})();
)JS";

inline constexpr const char* kReplayScript = R"JS(
// The log's columns decoded into plain arrays.
function replayInput() {
  var J = DATA.input;
  var I = { id: texts(J.id), p_value: numbers(J.p_value), line: integers(J.line),
            finished_at: numbers(J.finished_at), is_null: flags(J.is_null), columns: {} };
  Object.keys(J.columns || {}).forEach(function (name) { I.columns[name] = texts(J.columns[name]); });
  return I;
}

// The table and the bar chart of what each rule finds.
function summarySection(rules) {
  var summaryColumns = [
    { title: 'rule', value: function (r) { return r.rule + (r.added_for_report ? ' (added for this report)' : ''); } },
    { title: 'kind', value: function (r) { return r.online ? 'online' : 'hindsight'; } },
    { title: 'promise', cls: 'wrap', value: function (r) { return r.guarantee; } },
    { title: 'tests', num: true, value: function (r) { return full(r.summary.tests); } },
    { title: 'rejections', num: true, value: function (r) { return full(r.summary.rejections); } } ];
  if (DATA.has_truth) {
    summaryColumns.push(
      { title: 'false_discoveries', num: true, value: function (r) { return full(r.summary.false_discoveries); } },
      { title: 'fdp', num: true, value: function (r) { return full(r.summary.fdp); } },
      { title: 'power', num: true, value: function (r) { return full(r.summary.power); } });
  }
  renderTable(document.getElementById('summary-table'), summaryColumns, rules, 'Per rule');
  var labels = rules.map(function (r) { return r.rule; });
  var datasets;
  if (DATA.has_truth) {
    var hatch = document.createElement('canvas');
    hatch.width = hatch.height = 8;
    var h = hatch.getContext('2d');
    h.fillStyle = '#ffffff'; h.fillRect(0, 0, 8, 8);
    h.strokeStyle = COLORS[4]; h.lineWidth = 2;
    h.beginPath(); h.moveTo(0, 8); h.lineTo(8, 0); h.stroke();
    var pattern = document.getElementById('chart-summary').getContext('2d').createPattern(hatch, 'repeat');
    datasets = [
      { label: 'FDP (hatched)', data: rules.map(function (r) { return r.summary.fdp; }), backgroundColor: pattern,
        borderColor: COLORS[4], borderWidth: 1.5, pointStyle: 'rectRot' },
      { label: 'power (plain)', data: rules.map(function (r) { return r.summary.power; }), backgroundColor: COLORS[0],
        borderColor: COLORS[0], borderWidth: 1.5, pointStyle: 'rect' } ];
  } else {
    datasets = [ { label: 'discoveries', data: rules.map(function (r) { return r.summary.rejections; }),
      backgroundColor: COLORS[0], borderColor: COLORS[0], pointStyle: 'rect' } ];
  }
  makeChart('chart-summary', { type: 'bar', data: { labels: labels, datasets: datasets },
    options: { scales: { y: { beginAtZero: true, title: { display: true,
      text: DATA.has_truth ? 'proportion' : 'discoveries' } } } } });

}

// Discoveries so far per rule, at the drawn tests.
function discoveriesChart(I, rules) {
  var n = I.id.length, drawn = DATA.drawn;
  var counts = rules.map(function (r) {
    var c = new Array(n), s = 0;
    for (var i = 0; i < n; i++) { s += r.rejected[i]; c[i] = s; }
    return c;
  });
  var few = drawn.length <= 300;
  makeChart('chart-discoveries', {
    type: 'scatter',
    data: { datasets: rules.map(function (r, k) {
      var st = style(k);
      return { label: r.rule, showLine: true, stepped: true, borderColor: st.color, backgroundColor: st.color,
        borderDash: st.dash, borderWidth: 2, pointStyle: st.shape, pointRadius: few ? 3 : 0,
        data: drawn.map(function (i) { return { x: i + 1, y: counts[k][i], i: i }; }) };
    }) },
    options: { parsing: false, scales: {
      x: { type: 'linear', min: 1, max: Math.max(n, 1), title: { display: true, text: 'test, in log order' } },
      y: { beginAtZero: true, ticks: { precision: 0 }, title: { display: true, text: 'discoveries so far' } } },
      plugins: { tooltip: { callbacks: { label: function (ctx) {
        return ctx.dataset.label + ': ' + ctx.raw.y + ' after ' + I.id[ctx.raw.i]; } } } } }
  });
  thinningNote(drawn.length, n);
}

// The per-test table: the log's columns, then each rule's level and decision.
function perTestTable(I, rules) {
  var n = I.id.length;
  var columns = [
    { title: 'id', cls: 'id', value: function (i) { return I.id[i]; } },
    { title: 'line', num: true, value: function (i) { return String(I.line[i]); } },
    { title: 'p_value', num: true, value: function (i) { return full(I.p_value[i]); } } ];
  if (I.finished_at) columns.push({ title: 'finished_at', value: function (i) {
    var t = I.finished_at[i];
    return t === null ? '' : (t > 1e8 ? new Date(t * 1000).toISOString() : full(t)); } });
  if (I.is_null) columns.push({ title: 'is_null', num: true, value: function (i) { return String(I.is_null[i]); } });
  Object.keys(I.columns || {}).forEach(function (name) {
    var col = I.columns[name];
    columns.push({ title: name, value: function (i) { return col[i]; } });
  });
  rules.forEach(function (r) {
    columns.push({ title: r.rule + ' level', num: true, value: function (i) { return full(r.level[i]); } });
    columns.push({ title: r.rule, value: function (i) { return r.rejected[i] ? 'R' : ''; },
      mark: function (i) { return r.rejected[i] ? 'mark-r' : ''; } });
  });
  var all = [];
  for (var i = 0; i < n; i++) all.push(i);
  var box = document.getElementById('tests-table');
  function table(only) {
    renderTable(box, columns, only ? all.filter(function (i) {
      return rules.some(function (r) { return r.rejected[i]; }); }) : all, 'Per test, in the order decided');
  }
  table(false);
  document.getElementById('only-discoveries').addEventListener('change', function (e) { table(e.target.checked); });
}

(function () {
  var I = replayInput();
  var rules = DATA.rules.map(function (r) {
    var copy = Object.assign({}, r);
    copy.level = numbers(r.level);
    copy.rejected = flags(r.rejected);
    return copy;
  });
  summarySection(rules);
  discoveriesChart(I, rules);
  perTestTable(I, rules);
  offerSave(Object.assign({}, DATA, { input: I, rules: rules }));
  finish();
})();
)JS";

inline constexpr const char* kSimulationScript = R"JS(
(function () {
  var values = DATA.values;
  var labels = values.map(function (v) { return DATA.swept ? String(v) : 'this setting'; });
  var names = [];
  DATA.rows.forEach(function (r) { if (names.indexOf(r.rule) < 0) names.push(r.rule); });
  function find(rule, v) {
    for (var k = 0; k < DATA.rows.length; k++) {
      if (DATA.rows[k].rule === rule && DATA.rows[k].value === v) return DATA.rows[k];
    }
    return null;
  }
  function chart(id, key, seKey, title, withTarget) {
    var datasets = names.map(function (rule, k) {
      var st = style(k);
      var rows = values.map(function (v) { return find(rule, v); });
      return { label: rule, borderColor: st.color, backgroundColor: st.color, borderDash: st.dash, borderWidth: 2,
        pointStyle: st.shape, pointRadius: 5, pointHoverRadius: 7,
        data: rows.map(function (r) { return r ? r[key] : null; }),
        errorBars: rows.map(function (r) {
          if (!r || r[key] === null || r[seKey] === null) return null;
          return [r[key] - 2 * r[seKey], r[key] + 2 * r[seKey]]; }),
        ses: rows.map(function (r) { return r ? r[seKey] : null; }) };
    });
    if (withTarget) {
      datasets.push({ label: 'target ' + DATA.target, data: values.map(function () { return DATA.target; }),
        borderColor: '#000000', backgroundColor: '#000000', borderDash: [3, 3], borderWidth: 1.5,
        pointRadius: 0, pointStyle: 'line' });
    }
    makeChart(id, { type: 'line', data: { labels: labels, datasets: datasets },
      options: { scales: { x: { offset: true, title: { display: true,
          text: DATA.swept ? DATA.swept_label : '' } },
        y: { beginAtZero: true, title: { display: true, text: title } } },
        plugins: { tooltip: { callbacks: { label: function (ctx) {
          var se = ctx.dataset.ses ? ctx.dataset.ses[ctx.dataIndex] : null;
          return ctx.dataset.label + ': ' + rounded(ctx.raw, 4) + (se !== null && se !== undefined ?
            ' \u00b1 2 SE = ' + rounded(2 * se, 3) : ''); } } } } } });
  }
  chart('chart-fdr', 'fdr', 'fdr_se', 'realized FDR', true);
  chart('chart-power', 'power', 'power_se', 'power', false);
  var columns = [];
  if (DATA.swept) columns.push({ title: DATA.swept, num: true, value: function (r) { return full(r.value); } });
  ['rule', 'runs', 'tests', 'mean_rejections', 'fdr', 'fdr_se', 'mfdr', 'power', 'power_se', 'fwer'].forEach(function (k) {
    columns.push({ title: k, num: k !== 'rule', value: function (r) { return full(r[k]); } });
  });
  columns.push({ title: 'promise', value: function (r) { return r.promised + ' <= ' + r.target; } });
  columns.push({ title: 'check', value: function (r) {
    return r.exceeds_target ? 'ABOVE TARGET' : (r.promised_se === null ? '-' : 'ok'); },
    mark: function (r) { return r.exceeds_target ? 'above' : ''; } });
  renderTable(document.getElementById('results-table'), columns, DATA.rows, 'Per setting and rule');
  offerSave(DATA);
  finish();
})();
)JS";

}  // namespace alphaledger::report_assets

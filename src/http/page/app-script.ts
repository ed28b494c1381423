/**
 * The page's script, shipped as a string so that tsc carries it into dist with the rest (no
 * bundler). Plain ES2019 in one IIFE, no framework, no template literals (this is itself a
 * template). It polls the JSON API every 2 s and redraws: the overview (streams, components,
 * a sparkline of weights over the refreshes kept in the page), or a stream's page (densities of
 * the current and reference models over the histogram of recent values, component bands and
 * table, alert timeline with evidence). Data is inserted with textContent/attributes only, never
 * as HTML, since stream names come from the input.
 *
 * Colours: the Okabe–Ito palette (Okabe & Ito 2008, "Color Universal Design"), safe for the
 * common colour-vision deficiencies; every mark also has a word label and a line style.
 */
export const PAGE_SCRIPT = String.raw`(function () {
'use strict';
var BASE = (document.querySelector('meta[name="modewatch-base"]') || { content: '' }).content;
var SVGNS = 'http://www.w3.org/2000/svg';
var POLL_MS = 2000;
var SPARK_POINTS = 60;
// Okabe–Ito palette. Blue and vermillion are kept for the two model curves; components take the rest.
var CURRENT_COLOUR = '#0072B2';
var REFERENCE_COLOUR = '#D55E00';
var COMPONENT_COLOURS = ['#E69F00', '#009E73', '#CC79A7', '#56B4E9', '#000000', '#F0E442'];
var KIND_WORDS = {
  mode_emerged: 'New mode',
  mode_vanished: 'Mode vanished',
  weight_shift: 'Weight shift',
  location_shift: 'Location shift',
  poor_fit: 'Poor fit'
};
var STATE_WORDS = {
  bootstrap: 'bootstrapping (collecting a first sample)',
  warmup: 'warming up (learning, no alerts yet)',
  armed: 'armed (watching for changes)'
};
var STATE_SYMBOL = { firing: '\u25B2 ', pending: '\u25B3 ', resolved: '\u2713 ' };

function componentColour(id) { return COMPONENT_COLOURS[((id % COMPONENT_COLOURS.length) + COMPONENT_COLOURS.length) % COMPONENT_COLOURS.length]; }

function el(tag, attrs, children) {
  var e = document.createElement(tag);
  setAttrs(e, attrs);
  append(e, children);
  return e;
}
function sv(tag, attrs, children) {
  var e = document.createElementNS(SVGNS, tag);
  setAttrs(e, attrs);
  append(e, children);
  return e;
}
function setAttrs(e, attrs) {
  if (!attrs) return;
  Object.keys(attrs).forEach(function (k) {
    var v = attrs[k];
    if (v === null || v === undefined || v === false) return;
    if (k === 'text') e.textContent = String(v);
    else if (k === 'onclick') e.addEventListener('click', v);
    else e.setAttribute(k, String(v));
  });
}
function append(e, children) {
  if (children === null || children === undefined) return;
  if (!Array.isArray(children)) children = [children];
  children.forEach(function (c) {
    if (c === null || c === undefined || c === false) return;
    e.appendChild(typeof c === 'string' || typeof c === 'number' ? document.createTextNode(String(c)) : c);
  });
}
function clear(e) { while (e.firstChild) e.removeChild(e.firstChild); }

function fmt(x) {
  if (x === null || x === undefined || !isFinite(x)) return '\u2013';
  var a = Math.abs(x);
  if (a !== 0 && (a >= 1e5 || a < 1e-3)) return x.toExponential(3);
  return String(Number(x.toPrecision(4)));
}
function pct(w) { return (w === null || w === undefined || !isFinite(w)) ? '\u2013' : (100 * w).toFixed(1) + ' %'; }
function when(ts) {
  if (!ts || !isFinite(ts) || ts <= 0) return '\u2013';
  var d = new Date(ts);
  if (isNaN(d.getTime())) return '\u2013';
  return d.toISOString().replace('T', ' ').slice(0, 19) + ' UTC';
}
function unitWords(u) { return u ? u : 'stream units'; }
function kindWords(k) { return KIND_WORDS[k] || k; }
function badge(state, extra) {
  return el('span', { 'class': 'badge ' + state, text: (STATE_SYMBOL[state] || '') + state + (extra ? ' (' + extra + ')' : '') });
}

function api(path, opts) {
  return fetch(BASE + path, Object.assign({ headers: { Accept: 'application/json' }, credentials: 'same-origin' }, opts || {}))
    .then(function (r) {
      if (!r.ok) return r.text().then(function (t) { var e = new Error(r.status + ' ' + t); e.status = r.status; throw e; });
      return r.json();
    });
}

var live = document.getElementById('live');
function setLive(ok, msg) {
  if (!live) return;
  live.textContent = msg;
  live.className = ok ? 'live' : 'live stale';
}

function poll(load) {
  var stopped = false;
  function tick() {
    if (stopped) return;
    load().then(function () {
      setLive(true, 'updated ' + new Date().toLocaleTimeString() + ' \u00B7 every ' + POLL_MS / 1000 + ' s');
    }, function (err) {
      setLive(false, 'update failed: ' + (err && err.message ? err.message : String(err)));
    }).then(function () { if (!stopped) setTimeout(tick, POLL_MS); });
  }
  tick();
  return function () { stopped = true; };
}

// ---------------------------------------------------------------- overview

var sparkHistory = {};

function rememberWeights(s) {
  var h = sparkHistory[s.name] || (sparkHistory[s.name] = { points: [] });
  var byId = {};
  s.components.forEach(function (c) { byId[c.id] = c.weight; });
  h.points.push(byId);
  if (h.points.length > SPARK_POINTS) h.points.shift();
  return h.points;
}

function sparkline(points, components) {
  var w = 120, hgt = 28;
  var ids = {};
  points.forEach(function (p) { Object.keys(p).forEach(function (k) { ids[k] = true; }); });
  var label = 'Component weights over the last ' + points.length + ' refreshes' +
    (components.length ? ': ' + components.map(function (c) { return 'component ' + c.id + ' ' + pct(c.weight); }).join(', ') : '');
  var svg = sv('svg', { 'class': 'spark', width: w, height: hgt, viewBox: '0 0 ' + w + ' ' + hgt, role: 'img', 'aria-label': label });
  svg.appendChild(sv('title', { text: label }));
  svg.appendChild(sv('line', { x1: 0, x2: w, y1: hgt - 1, y2: hgt - 1, stroke: '#ddd' }));
  // Few points yet: spread them over the whole width (one point draws as a level line).
  var step = points.length > 1 ? w / (points.length - 1) : 0;
  var x0 = 0;
  Object.keys(ids).forEach(function (id) {
    var d = '';
    var pen = false;
    points.forEach(function (p, i) {
      var v = p[id];
      if (v === undefined) { pen = false; return; }
      var x = x0 + i * step, y = 1 + (hgt - 3) * (1 - v);
      d += (pen ? 'L' : 'M') + x.toFixed(1) + ' ' + y.toFixed(1);
      pen = true;
    });
    if (points.length === 1 && d) d += 'H' + w;
    if (d) svg.appendChild(sv('path', { d: d, fill: 'none', stroke: componentColour(Number(id)), 'stroke-width': 1.6 }));
  });
  return svg;
}

function overview(main) {
  document.title = 'Streams \u2013 modewatch';
  clear(main);
  var query = '';
  var count = el('p', { 'class': 'muted', id: 'stream-count' });
  var input = el('input', { type: 'search', id: 'filter', placeholder: 'part of a stream name', 'aria-describedby': 'stream-count' });
  var body = el('tbody');
  var table = el('table', { id: 'streams' }, [
    el('caption', { text: 'Streams with active alerts first, then by name. Weights are of the current model.' }),
    el('thead', null, el('tr', null, [
      el('th', { scope: 'col', text: 'Stream' }),
      el('th', { scope: 'col', text: 'State' }),
      el('th', { scope: 'col', 'class': 'num', text: 'Components' }),
      el('th', { scope: 'col', text: 'Weights over recent refreshes' }),
      el('th', { scope: 'col', 'class': 'num', text: 'Shift score' }),
      el('th', { scope: 'col', text: 'Alerts now' }),
      el('th', { scope: 'col', text: 'Last alert' }),
      el('th', { scope: 'col', 'class': 'num', text: 'Events' }),
      el('th', { scope: 'col', text: 'Last event' })
    ])),
    body
  ]);
  append(main, [
    el('h1', { text: 'Streams' }),
    el('div', { 'class': 'filter' }, [el('label', { 'for': 'filter', text: 'Filter' }), input, count]),
    table
  ]);
  var timer = null;
  input.addEventListener('input', function () {
    clearTimeout(timer);
    timer = setTimeout(function () { query = input.value; load(); }, 250);
  });
  function load() {
    return api('/api/streams?limit=200&q=' + encodeURIComponent(query)).then(function (data) {
      var alerting = 0;
      clear(body);
      data.streams.forEach(function (s) {
        if (s.alerts.length) alerting++;
        var points = rememberWeights(s);
        var alertsNow = s.alerts.length
          ? s.alerts.map(function (a) { return el('div', null, [badge(a.state), ' ', kindWords(a.kind)]); })
          : el('span', { 'class': 'muted', text: 'none' });
        var last = s.lastTransition
          ? [badge(s.lastTransition.state), ' ', kindWords(s.lastTransition.kind), el('div', { 'class': 'muted', text: when(s.lastTransition.ts) })]
          : el('span', { 'class': 'muted nowrap', text: 'none yet' });
        body.appendChild(el('tr', { 'data-stream': s.name }, [
          el('th', { scope: 'row' }, el('a', { href: BASE + '/streams/' + encodeURIComponent(s.name), text: s.name })),
          el('td', { 'class': 'state', text: s.state }),
          el('td', { 'class': 'num', text: s.components.length }),
          el('td', { 'class': 'nowrap' }, [sparkline(points, s.components),
            el('span', { 'class': 'spark-values', text: s.components.map(function (c) { return '#' + c.id + ' ' + (100 * c.weight).toFixed(0) + '%'; }).join(' \u00B7 ') })]),
          el('td', { 'class': 'num', text: s.state === 'armed' ? s.shiftScore.toFixed(2) : '\u2013' }),
          el('td', null, alertsNow),
          el('td', null, last),
          el('td', { 'class': 'num', text: s.events.toLocaleString('en') }),
          el('td', { 'class': 'muted nowrap', text: when(s.lastEventTs) })
        ]));
      });
      count.textContent = 'Showing ' + data.streams.length + ' of ' + data.matched + ' matching (' + data.total + ' streams in all); ' +
        alerting + ' shown with active alerts.';
      if (!data.streams.length) body.appendChild(el('tr', null, el('td', { colspan: 9, 'class': 'muted', text: 'No streams yet.' })));
    });
  }
  poll(load);
}

// ---------------------------------------------------------------- stream page

function toAxis(axis, x) {
  if (axis === 'log') return Math.log(x);
  if (axis === 'log1p') return Math.log(1 + x);
  return x;
}

function niceStep(span, n) {
  var raw = span / Math.max(1, n);
  var p = Math.pow(10, Math.floor(Math.log(raw) / Math.LN10));
  var f = raw / p;
  return (f < 1.5 ? 1 : f < 3 ? 2 : f < 7 ? 5 : 10) * p;
}

function linearTicks(lo, hi, n) {
  if (!(hi > lo)) return [lo];
  var step = niceStep(hi - lo, n);
  var out = [];
  for (var v = Math.ceil(lo / step) * step; v <= hi + step * 1e-9 && out.length < 50; v += step) out.push(Math.abs(v) < step * 1e-9 ? 0 : v);
  return out;
}

/** Ticks in stream units for an axis on the model scale. */
function ticksFor(axis, xlo, xhi) {
  if (axis === 'identity') return linearTicks(xlo, xhi, 6);
  var out = [];
  var lo = Math.max(xlo, axis === 'log' ? 1e-300 : 0);
  if (axis === 'log1p' && xlo <= 0 && xhi >= 0) out.push(0);
  if (xhi > 0 && lo > 0) {
    for (var e = Math.floor(Math.log(lo) / Math.LN10); e <= Math.ceil(Math.log(xhi) / Math.LN10); e++) {
      [1, 2, 5].forEach(function (m) { var v = m * Math.pow(10, e); if (v >= lo && v <= xhi) out.push(v); });
    }
  }
  if (out.length > 9) out = out.filter(function (v) { return Math.abs(Math.log(v) / Math.LN10 - Math.round(Math.log(v) / Math.LN10)) < 1e-9 || v === 0; });
  if (out.length < 3) out = linearTicks(xlo, xhi, 5).filter(function (v) { return axis === 'log' ? v > 0 : v > -1; });
  return out;
}

function densityChart(d) {
  var W = 760, padL = 56, padR = 18, padT = 14, plotH = 210, axisH = 34;
  var comps = d.bands.current;
  var stripTop = padT + plotH + axisH;
  var rowH = 16;
  var H = stripTop + Math.max(1, comps.length) * rowH + 24;
  var plotW = W - padL - padR;
  var edges = d.histogram.edges.map(function (x) { return toAxis(d.axis, x); });
  var lo = edges[0], hi = edges[edges.length - 1];
  var span = hi - lo || 1;
  function X(y) { return padL + ((y - lo) / span) * plotW; }
  var gy = d.grid.x.map(function (x) { return toAxis(d.axis, x); });
  var binW = edges.length > 1 ? edges[1] - edges[0] : 1;
  var hist = d.histogram.counts.map(function (c) { return d.histogram.total > 0 ? c / (d.histogram.total * binW) : 0; });
  var ymax = 0;
  hist.forEach(function (v) { ymax = Math.max(ymax, v); });
  d.grid.current.forEach(function (v) { ymax = Math.max(ymax, v); });
  d.grid.reference.forEach(function (v) { ymax = Math.max(ymax, v); });
  ymax = ymax > 0 ? ymax * 1.08 : 1;
  function Y(v) { return padT + plotH * (1 - v / ymax); }

  var label = 'Histogram of the last ' + d.histogram.total + ' values with the fitted density of the current model (solid line) and of the reference model (dashed line); ' +
    comps.length + ' current components: ' + comps.map(function (b) { return 'component ' + b.id + ' near ' + fmt(b.location); }).join(', ') + '.';
  var svg = sv('svg', { 'class': 'chart', id: 'density-chart', viewBox: '0 0 ' + W + ' ' + H, role: 'img', 'aria-label': label });
  svg.appendChild(sv('title', { text: label }));

  // histogram bars
  var bars = sv('g', { 'class': 'histogram', fill: '#cfcfcf', stroke: '#b5b5b5', 'stroke-width': 0.5 });
  hist.forEach(function (v, i) {
    if (v <= 0) return;
    bars.appendChild(sv('rect', { x: X(edges[i]).toFixed(2), y: Y(v).toFixed(2), width: Math.max(0.5, X(edges[i + 1]) - X(edges[i])).toFixed(2), height: (padT + plotH - Y(v)).toFixed(2) }));
  });
  svg.appendChild(bars);

  function curve(values, cls, colour, dash, width) {
    var dd = '';
    values.forEach(function (v, i) { dd += (i ? 'L' : 'M') + X(gy[i]).toFixed(2) + ' ' + Y(v).toFixed(2); });
    return sv('path', { 'class': cls, d: dd, fill: 'none', stroke: colour, 'stroke-width': width, 'stroke-dasharray': dash, 'stroke-linejoin': 'round' });
  }
  if (d.reference.length) svg.appendChild(curve(d.grid.reference, 'density-reference', REFERENCE_COLOUR, '7 4', 2.2));
  if (d.components.length) svg.appendChild(curve(d.grid.current, 'density-current', CURRENT_COLOUR, null, 2.6));

  // x axis
  var axis = sv('g', { 'class': 'axis' });
  axis.appendChild(sv('line', { x1: padL, x2: padL + plotW, y1: padT + plotH, y2: padT + plotH }));
  axis.appendChild(sv('line', { x1: padL, x2: padL, y1: padT, y2: padT + plotH }));
  ticksFor(d.axis, d.histogram.edges[0], d.histogram.edges[d.histogram.edges.length - 1]).forEach(function (t) {
    var x = X(toAxis(d.axis, t));
    if (!(x >= padL - 0.5 && x <= padL + plotW + 0.5)) return;
    axis.appendChild(sv('line', { x1: x, x2: x, y1: padT + plotH, y2: padT + plotH + 5 }));
    axis.appendChild(sv('text', { x: x, y: padT + plotH + 17, 'text-anchor': 'middle', text: fmt(t) }));
  });
  axis.appendChild(sv('text', { x: padL + plotW, y: padT + plotH + 31, 'text-anchor': 'end', 'class': 'axis-title',
    text: 'value (' + unitWords(d.unit) + ')' + (d.axis === 'identity' ? '' : d.axis === 'log' ? ', logarithmic axis' : ', log(1 + x) axis') }));
  axis.appendChild(sv('text', { x: 14, y: padT + plotH / 2, 'text-anchor': 'middle', transform: 'rotate(-90 14 ' + (padT + plotH / 2) + ')', text: 'density' }));
  svg.appendChild(axis);

  // component bands: the central 68 % interval of each current component, one row each
  var strip = sv('g', { 'class': 'bands' });
  comps.forEach(function (b, i) {
    var y = stripTop + i * rowH;
    var x1 = Math.max(padL, X(toAxis(d.axis, b.lo))), x2 = Math.min(padL + plotW, X(toAxis(d.axis, b.hi)));
    var xm = X(toAxis(d.axis, b.location));
    var colour = componentColour(b.id);
    var g = sv('g', { 'class': 'band', 'data-component': b.id });
    g.appendChild(sv('text', { x: padL - 6, y: y + 10, 'text-anchor': 'end', text: '#' + b.id }));
    if (x2 > x1) g.appendChild(sv('rect', { x: x1.toFixed(2), y: y + 2, width: (x2 - x1).toFixed(2), height: rowH - 5, fill: colour, 'fill-opacity': 0.35, stroke: colour }));
    if (xm >= padL && xm <= padL + plotW) g.appendChild(sv('line', { x1: xm, x2: xm, y1: y, y2: y + rowH - 1, stroke: '#000', 'stroke-width': 1.5 }));
    strip.appendChild(g);
  });
  svg.appendChild(strip);
  svg.appendChild(sv('text', { x: padL, y: H - 6, 'class': 'muted', text: 'Bands: each current component\u2019s central 68 % interval; the black tick is its location.' }));
  return svg;
}

function legend() {
  function swatch(colour, dash, kind) {
    var s = sv('svg', { width: 34, height: 12, 'class': 'swatch', 'aria-hidden': 'true' });
    if (kind === 'bar') s.appendChild(sv('rect', { x: 4, y: 1, width: 26, height: 10, fill: '#cfcfcf', stroke: '#b5b5b5' }));
    else s.appendChild(sv('line', { x1: 1, x2: 33, y1: 6, y2: 6, stroke: colour, 'stroke-width': 2.6, 'stroke-dasharray': dash }));
    return s;
  }
  return el('ul', { 'class': 'legend', 'aria-label': 'Chart legend' }, [
    el('li', null, [swatch(null, null, 'bar'), 'Histogram of recent values']),
    el('li', null, [swatch(CURRENT_COLOUR, null), 'Current model (solid line): what is happening']),
    el('li', null, [swatch(REFERENCE_COLOUR, '7 4'), 'Reference model (dashed line): what is normal'])
  ]);
}

function componentTable(d) {
  var ref = {};
  d.reference.forEach(function (c) { ref[c.id] = c; });
  var cur = {};
  d.components.forEach(function (c) { cur[c.id] = c; });
  var bands = {};
  d.bands.current.forEach(function (b) { bands[b.id] = b; });
  var rows = d.components.slice();
  d.reference.forEach(function (c) { if (!cur[c.id]) rows.push(c); });
  var unit = unitWords(d.unit);
  var body = el('tbody', null, rows.map(function (c) {
    var inCur = cur[c.id], inRef = ref[c.id], b = bands[c.id];
    var note = !inRef ? 'new: not in the reference' : !inCur ? 'only in the reference: not seen now' : '';
    return el('tr', { 'data-component': c.id }, [
      el('th', { scope: 'row' }, [
        sv('svg', { width: 12, height: 12, 'aria-hidden': 'true', 'class': 'swatch' }, sv('rect', { width: 12, height: 12, fill: componentColour(c.id), 'fill-opacity': 0.6, stroke: componentColour(c.id) })),
        ' #' + c.id
      ]),
      el('td', { 'class': 'num', text: inCur ? pct(inCur.weight) : '\u2013' }),
      el('td', { 'class': 'num', text: inCur ? fmt(inCur.location) : '\u2013' }),
      el('td', { 'class': 'num', text: inCur ? fmt(inCur.spread) : '\u2013' }),
      el('td', { 'class': 'num', text: b ? fmt(b.lo) + ' \u2013 ' + fmt(b.hi) : '\u2013' }),
      el('td', { 'class': 'num', text: inRef ? pct(inRef.weight) : '\u2013' }),
      el('td', { 'class': 'num', text: inRef ? fmt(inRef.location) : '\u2013' }),
      el('td', { 'class': 'num', text: inRef ? fmt(inRef.spread) : '\u2013' }),
      el('td', { text: note })
    ]);
  }));
  return el('table', { id: 'components' }, [
    el('caption', { text: 'Location is the median and spread half the central 68 % interval of each component, in ' + unit + '. Ids stay with a component for its whole life.' }),
    el('thead', null, [
      el('tr', null, [
        el('td'),
        el('th', { scope: 'colgroup', colspan: 4, text: 'Current model' }),
        el('th', { scope: 'colgroup', colspan: 3, text: 'Reference model' }),
        el('td')
      ]),
      el('tr', null, [
        el('th', { scope: 'col', text: 'Component' }),
        el('th', { scope: 'col', 'class': 'num', text: 'Weight' }),
        el('th', { scope: 'col', 'class': 'num', text: 'Location' }),
        el('th', { scope: 'col', 'class': 'num', text: 'Spread' }),
        el('th', { scope: 'col', 'class': 'num', text: '68 % band' }),
        el('th', { scope: 'col', 'class': 'num', text: 'Weight' }),
        el('th', { scope: 'col', 'class': 'num', text: 'Location' }),
        el('th', { scope: 'col', 'class': 'num', text: 'Spread' }),
        el('th', { scope: 'col', text: 'Note' })
      ])
    ]),
    body
  ]);
}

function viewsTable(title, views, unit, highlight) {
  return el('table', null, [
    el('caption', { text: title }),
    el('thead', null, el('tr', null, [
      el('th', { scope: 'col', text: 'Component' }),
      el('th', { scope: 'col', 'class': 'num', text: 'Weight' }),
      el('th', { scope: 'col', 'class': 'num', text: 'Location (' + unit + ')' }),
      el('th', { scope: 'col', 'class': 'num', text: 'Spread (' + unit + ')' })
    ])),
    el('tbody', null, views.map(function (c) {
      return el('tr', null, [
        el('th', { scope: 'row', text: '#' + c.id + (c.id === highlight ? ' (this alert)' : '') }),
        el('td', { 'class': 'num', text: pct(c.weight) }),
        el('td', { 'class': 'num', text: fmt(c.location) }),
        el('td', { 'class': 'num', text: fmt(c.spread) })
      ]);
    }))
  ]);
}

function evidenceBlock(ev, unit, key, openKeys) {
  var det = el('details', { 'data-key': key });
  if (openKeys[key]) det.open = true;
  det.addEventListener('toggle', function () { if (det.open) openKeys[key] = true; else delete openKeys[key]; });
  append(det, [
    el('summary', { text: 'Evidence' }),
    el('dl', { 'class': 'evidence' }, [
      el('dt', { text: 'Statistic' }), el('dd', { text: ev.statistic }),
      el('dt', { text: 'Value' }), el('dd', { text: fmt(ev.value) }),
      el('dt', { text: 'Threshold' }), el('dd', { text: fmt(ev.threshold) }),
      el('dt', { text: 'Component' }), el('dd', { text: ev.componentId === null ? 'the whole stream' : '#' + ev.componentId }),
      el('dt', { text: 'First evidence' }), el('dd', { text: when(ev.firstEvidenceTs) + ' (input position ' + ev.firstEvidenceOffset + ')' })
    ]),
    el('div', { 'class': 'pair' }, [
      viewsTable('Before: reference model', ev.before, unit, ev.componentId),
      viewsTable('After: current model', ev.after, unit, ev.componentId)
    ])
  ]);
  return det;
}

function alertItem(a, state, ts, extra, unit, key, openKeys) {
  return el('li', { 'class': state, 'data-kind': a.kind }, [
    el('div', null, [badge(state, extra), ' ', el('span', { 'class': 'what', text: kindWords(a.kind) }), ' ', el('span', { 'class': 'when', text: when(ts) })]),
    el('div', { text: a.evidence.summary }),
    evidenceBlock(a.evidence, unit, key, openKeys)
  ]);
}

function streamPage(main, name) {
  document.title = name + ' \u2013 modewatch';
  clear(main);
  var openKeys = {};
  var heading = el('h1', { text: name });
  var facts = el('dl', { 'class': 'facts', 'aria-label': 'Stream status' });
  var message = el('span', { 'class': 'message', role: 'status' });
  var button = el('button', { type: 'button', id: 'rebaseline', text: 'Accept the current model as normal (re-baseline)' });
  var chartBox = el('figure', { id: 'distribution' });
  var compBox = el('div');
  var activeBox = el('div', { id: 'active-alerts' });
  var timelineBox = el('div', { id: 'timeline' });
  append(main, [
    el('nav', { 'aria-label': 'Breadcrumb' }, el('p', { 'class': 'crumbs' }, el('a', { href: BASE + '/', text: '\u2190 All streams' }))),
    heading, facts,
    el('div', null, [button, message]),
    el('section', { 'aria-labelledby': 'h-dist' }, [el('h2', { id: 'h-dist', text: 'Distribution' }), chartBox]),
    el('section', { 'aria-labelledby': 'h-comp' }, [el('h2', { id: 'h-comp', text: 'Components' }), compBox]),
    el('section', { 'aria-labelledby': 'h-alerts' }, [
      el('h2', { id: 'h-alerts', text: 'Alerts' }),
      el('h3', { text: 'Active now' }), activeBox,
      el('h3', { text: 'Timeline (newest first)' }), timelineBox
    ])
  ]);
  button.addEventListener('click', function () {
    if (!window.confirm('Accept the current model of "' + name + '" as the new normal? Active alerts of this stream resolve.')) return;
    api('/api/streams/' + encodeURIComponent(name) + '/rebaseline', { method: 'POST' }).then(function () {
      message.textContent = 'Re-baselined: the reference is now the current model.';
    }, function (err) { message.textContent = 'Re-baseline failed: ' + err.message; });
  });
  function fact(label, value) { return el('div', null, [el('dt', { text: label }), el('dd', { text: value })]); }
  function load() {
    return api('/api/streams/' + encodeURIComponent(name)).then(function (d) {
      clear(facts);
      append(facts, [
        fact('State', STATE_WORDS[d.state] || d.state),
        fact('Events', d.events.toLocaleString('en')),
        fact('Last event', when(d.lastEventTs)),
        fact('Unit', unitWords(d.unit)),
        fact('Model scale', d.scale),
        fact('Shift score', d.state === 'armed' ? d.shiftScore.toFixed(2) + (d.shiftScore >= 1 ? ' (over threshold)' : ' (below threshold)') : '\u2013'),
        fact('Rejected values', String(d.rejected))
      ]);
      clear(chartBox);
      if (d.components.length || d.histogram.total) {
        append(chartBox, [densityChart(d), legend(),
          el('figcaption', { text: 'Densities are drawn per unit of the ' + (d.axis === 'identity' ? 'value' : d.axis === 'log' ? 'logarithm of the value' : 'logarithm of (1 + value)') + ', so the histogram and the curves share one vertical scale.' })]);
      } else chartBox.appendChild(el('p', { 'class': 'muted', text: 'No values yet.' }));
      clear(compBox);
      compBox.appendChild(d.components.length || d.reference.length ? componentTable(d) : el('p', { 'class': 'muted', text: 'No model yet: the stream is collecting its first sample (' + d.events + ' events so far).' }));
      var unit = unitWords(d.unit);
      clear(activeBox);
      if (d.alerts.length) {
        activeBox.appendChild(el('ul', { 'class': 'timeline' }, d.alerts.map(function (a) {
          return alertItem(a, a.state, a.startsAt, null, unit, 'active:' + a.key, openKeys);
        })));
      } else activeBox.appendChild(el('p', { 'class': 'muted', text: 'No active alerts.' }));
      clear(timelineBox);
      if (d.history.length) {
        timelineBox.appendChild(el('ol', { 'class': 'timeline', 'aria-label': 'Alert transitions, newest first' }, d.history.map(function (t) {
          return alertItem(t, t.state, t.ts, t.resolution, unit, 'hist:' + t.key + ':' + t.state + ':' + t.ts, openKeys);
        })));
      } else timelineBox.appendChild(el('p', { 'class': 'muted', text: 'No alert has fired on this stream yet.' }));
    }, function (err) {
      if (err.status === 404) {
        clear(facts);
        facts.appendChild(el('div', null, el('dd', { text: 'No stream of this name (it may not have sent events yet, or it was dropped).' })));
        return;
      }
      throw err;
    });
  }
  poll(load);
}

function start() {
  var main = document.getElementById('main');
  var path = location.pathname;
  if (BASE && path.indexOf(BASE) === 0) path = path.slice(BASE.length);
  var m = /^\/streams\/([^/]+)$/.exec(path);
  if (m) {
    var name;
    try { name = decodeURIComponent(m[1]); } catch (e) { name = m[1]; }
    streamPage(main, name);
  } else overview(main);
}
if (document.readyState === 'loading') document.addEventListener('DOMContentLoaded', start); else start();
})();
`;

// SVG charts drawn from the API's JSON: axes with units and labels, series
// told apart by line pattern and marker shape (never by colour alone, so a
// black-and-white print reads the same), interval bands hatched, a keyboard
// cursor (focus the chart, then arrow keys) with a spoken readout, and the
// numbers as a table behind a disclosure for readers who prefer text.
//
// plot(spec) returns a <figure>. spec:
//   id, title, desc            chart name (data-chart), heading, one-line summary
//   height                     of the plot in viewBox units (width is 860)
//   x, y, y2                   axes: {type: 'linear'|'log'|'time', label, unit,
//                              min?, max?, format?(v), integer?}
//   layers                     drawn in order, each {kind, name?, cls, axis?, ...}:
//     line   data [{x, y}]     dash?, marker? ('circle'|'square'|'triangle'|'diamond'|'cross')
//     band   data [{x, lo, hi}]   the interval, hatched
//     bars   data [{x, lo, hi}]   error bars
//     hline  y, label          a threshold across the plot
//     events data [{x, label, text}]  marks on the time axis (alerts)
//     peaks  data [{x, y, label}]     marked points with a label above
//   cursor                     {layer: name, describe(p), activate?(p)}
//   table                      {columns: [{label, value(row)}], rows}
import {s, h, nextId, num, sig, dayLabel, monthLabel, hourLabel} from './format.js';
import {csvButton} from './shared.js';

const DEFAULT_WIDTH = 860;
const MARGIN = {top: 18, right: 24, bottom: 46, left: 74};
const MARGIN_Y2 = 74;
const MARKER = 3.4;  // half-size of a point marker, viewBox units

// ------------------------------------------------------------------ scales

function niceStep(span, count) {
  const raw = span / Math.max(1, count);
  const p = Math.pow(10, Math.floor(Math.log10(raw)));
  const m = raw / p;
  return (m < 1.5 ? 1 : m < 3 ? 2 : m < 7 ? 5 : 10) * p;
}

class Scale {
  constructor(axis, lo, hi, r0, r1) {
    this.type = axis.type || 'linear';
    this.axis = axis;
    if (this.type === 'log') {
      this.lo = Math.log10(lo);
      this.hi = Math.log10(hi);
    } else {
      this.lo = lo;
      this.hi = hi;
    }
    if (!(this.hi > this.lo)) {
      const pad = Math.abs(this.lo) * 0.05 || 1;
      this.lo -= pad;
      this.hi += pad;
    }
    this.r0 = r0;
    this.r1 = r1;
  }
  map(v) {
    const u = this.type === 'log' ? Math.log10(v) : v;
    return this.r0 + ((u - this.lo) / (this.hi - this.lo)) * (this.r1 - this.r0);
  }
  ok(v) {
    return v !== null && v !== undefined && isFinite(v) && (this.type !== 'log' || v > 0);
  }
  ticks(count) {
    if (this.type === 'log') return this.logTicks();
    if (this.type === 'time') return this.timeTicks(count);
    let step = niceStep(this.hi - this.lo, count);
    if (this.axis.integer) step = Math.max(1, Math.round(step));
    const out = [];
    for (let v = Math.ceil(this.lo / step) * step; v <= this.hi + step * 1e-9; v += step) {
      const r = Math.abs(v) < step * 1e-9 ? 0 : v;
      out.push({v: r, label: this.axis.format ? this.axis.format(r) : num(r, Math.max(0, -Math.floor(Math.log10(step))))});
    }
    return out;
  }
  logTicks() {
    const out = [];
    const d0 = Math.floor(this.lo), d1 = Math.ceil(this.hi);
    const decades = d1 - d0;
    const every = decades > 8 ? 2 : 1;
    for (let d = d0; d <= d1; d++) {
      for (const m of decades <= 2 ? [1, 2, 5] : [1]) {
        const u = d + Math.log10(m);
        if (u < this.lo - 1e-9 || u > this.hi + 1e-9) continue;
        if (m === 1 && (d - d0) % every) continue;
        const v = Math.pow(10, u);
        out.push({v, label: m === 1 ? '1e' + d : String(m) + 'e' + d});
      }
    }
    return out;
  }
  timeTicks(count) {
    const H = 3600e3, D = 24 * H;
    const span = this.hi - this.lo;
    const steps = [[H, 'h'], [3 * H, 'h'], [6 * H, 'h'], [12 * H, 'h'], [D, 'd'], [2 * D, 'd'], [7 * D, 'd'],
      [14 * D, 'd'], [1, 'M'], [2, 'M'], [3, 'M'], [6, 'M'], [12, 'M'], [24, 'M']];
    let pick = steps[steps.length - 1];
    for (const st of steps) {
      const approx = st[1] === 'M' ? st[0] * 30.44 * D : st[0];
      if (span / approx <= count) {
        pick = st;
        break;
      }
    }
    const out = [];
    const [n, unit] = pick;
    if (unit === 'M') {
      const d = new Date(this.lo);
      let y = d.getUTCFullYear(), m = d.getUTCMonth();
      m = Math.ceil((m + (d.getUTCDate() > 1 || d.getUTCHours() > 0 ? 1 : 0)) / n) * n;
      for (;;) {
        const t = Date.UTC(y + Math.floor(m / 12), m % 12, 1);
        if (t > this.hi) break;
        if (t >= this.lo) out.push({v: t, label: monthLabel(t)});
        m += n;
      }
    } else {
      const offset = unit === 'd' && n === 7 ? 4 * D : 0;  // weeks start on Mondays (1970-01-05)
      for (let t = Math.ceil((this.lo - offset) / n) * n + offset; t <= this.hi; t += n) {
        out.push({v: t, label: unit === 'h' && n < D ? (t % D === 0 ? dayLabel(t) : hourLabel(t)) : dayLabel(t)});
      }
    }
    return out;
  }
}

// Data extent of the layers on one axis, with 4 % padding (not below 0 on a
// log axis, not past bounds given in the axis).
function extent(layers, axisName, pick, axis, horizontal) {
  let lo = Infinity, hi = -Infinity;
  const take = (v) => {
    if (v === null || v === undefined || !isFinite(v)) return;
    if (axis.type === 'log' && v <= 0) return;
    lo = Math.min(lo, v);
    hi = Math.max(hi, v);
  };
  for (const L of layers) {
    if (!horizontal && (L.axis || 'y') !== axisName) continue;
    if (L.extent === false) continue;
    pick(L, take);
  }
  if (!isFinite(lo)) {
    lo = axis.type === 'log' ? 1e-6 : 0;
    hi = axis.type === 'log' ? 1 : 1;
  }
  if (axis.type === 'log') {
    const l0 = Math.log10(lo), l1 = Math.log10(hi), pad = Math.max(0.05, (l1 - l0) * 0.04);
    lo = Math.pow(10, l0 - pad);
    hi = Math.pow(10, l1 + pad);
  } else if (axis.type !== 'time' || hi > lo) {
    const pad = (hi - lo) * 0.04 || Math.abs(hi) * 0.05 || 1;
    lo -= pad;
    hi += pad;
  } else {
    lo -= 12 * 3600e3;
    hi += 12 * 3600e3;
  }
  if (axis.min !== undefined) lo = axis.min;
  if (axis.max !== undefined) hi = axis.max;
  return [lo, hi];
}

function xValues(L, take) {
  for (const p of L.data || []) take(p.x);
}
function yValues(L, take) {
  if (L.kind === 'hline') return take(L.y);
  if (L.kind === 'events') return;
  for (const p of L.data || []) {
    if (L.kind === 'band' || L.kind === 'bars') {
      take(p.lo);
      take(p.hi);
    } else {
      take(p.y);
    }
  }
}

// ----------------------------------------------------------------- markers

function markerPath(shape, x, y, r = MARKER) {
  switch (shape) {
    case 'square':
      return `M${x - r},${y - r}h${2 * r}v${2 * r}h${-2 * r}z`;
    case 'triangle':
      return `M${x},${y - r * 1.25}L${x + r * 1.15},${y + r * 0.85}L${x - r * 1.15},${y + r * 0.85}z`;
    case 'diamond':
      return `M${x},${y - r * 1.35}L${x + r * 1.1},${y}L${x},${y + r * 1.35}L${x - r * 1.1},${y}z`;
    case 'cross':
      return `M${x - r},${y - r}L${x + r},${y + r}M${x - r},${y + r}L${x + r},${y - r}`;
    default:  // circle as a path: one element type for every marker
      return `M${x - r},${y}a${r},${r} 0 1,0 ${2 * r},0a${r},${r} 0 1,0 ${-2 * r},0`;
  }
}

// A legend sample: the layer's line pattern and marker, 28 x 12.
function sample(L) {
  const g = s('svg', {viewBox: '0 0 28 12', width: 28, height: 12, 'aria-hidden': 'true', focusable: 'false', class: L.cls});
  if (L.kind === 'band') {
    g.append(s('rect', {x: 1, y: 2, width: 26, height: 8, class: 'band-fill'}));
    g.append(s('rect', {x: 1, y: 2, width: 26, height: 8, class: 'band-hatch', fill: 'url(#hatch-legend)'}));
  } else if (L.kind === 'events') {
    g.append(s('path', {d: markerPath(L.marker || 'triangle', 14, 7, 4.2), class: 'ev-mark'}));
  } else if (L.kind === 'bars') {
    g.append(s('path', {d: 'M14,1V11M11,1H17M11,11H17', class: 'bars'}));
  } else {
    if (L.kind !== 'peaks') g.append(s('path', {d: 'M1,6H27', class: 'line', 'stroke-dasharray': L.dash || null}));
    if (L.marker || L.kind === 'peaks') {
      g.append(s('path', {d: markerPath(L.marker || 'diamond', 14, 6), class: 'pt-mark'}));
    }
  }
  return g;
}

// Shared hatch pattern for legend samples (one per document).
function ensureLegendHatch() {
  if (document.getElementById('hatch-legend')) return;
  const defs = s('svg', {width: 0, height: 0, class: 'defs', 'aria-hidden': 'true', focusable: 'false'},
      s('defs', null, hatch('hatch-legend')));
  document.body.append(defs);
}

function hatch(id) {
  return s('pattern', {id, patternUnits: 'userSpaceOnUse', width: 6, height: 6, patternTransform: 'rotate(45)'},
      s('line', {x1: 0, y1: 0, x2: 0, y2: 6, class: 'hatch-line'}));
}

// -------------------------------------------------------------------- plot

export function plot(spec) {
  ensureLegendHatch();
  const height = spec.height || 300;
  const WIDTH = spec.width || DEFAULT_WIDTH;
  const margin = {...MARGIN, right: spec.y2 ? MARGIN_Y2 : MARGIN.right};
  const px0 = margin.left, px1 = WIDTH - margin.right, py0 = margin.top, py1 = height - margin.bottom;
  const layers = spec.layers.filter((L) => L && (L.kind === 'hline' ? isFinite(L.y) && L.y !== null : true));

  const [xlo, xhi] = extent(layers, 'x', xValues, spec.x, true);
  const xs = new Scale(spec.x, xlo, xhi, px0, px1);
  const [ylo, yhi] = extent(layers, 'y', yValues, spec.y);
  const ys = new Scale(spec.y, ylo, yhi, py1, py0);
  let y2s = null;
  if (spec.y2) {
    const [a, b] = extent(layers, 'y2', yValues, spec.y2);
    y2s = new Scale(spec.y2, a, b, py1, py0);
  }
  const scaleOf = (L) => ((L.axis || 'y') === 'y2' ? y2s : ys);

  const titleId = nextId('t'), descId = nextId('d'), hatchId = nextId('hatch'), clipId = nextId('clip');
  const svg = s('svg', {
    viewBox: `0 0 ${WIDTH} ${height}`, class: 'plot', role: 'img', tabindex: spec.cursor ? 0 : null,
    'aria-labelledby': `${titleId} ${descId}`, focusable: spec.cursor ? 'true' : 'false',
  });
  svg.append(s('title', {id: titleId}, spec.title));
  svg.append(s('desc', {id: descId}, spec.desc + (spec.cursor ? ' Focus the chart and use the arrow keys to read each point.' : '')));
  svg.append(s('defs', null, hatch(hatchId),
      s('clipPath', {id: clipId}, s('rect', {x: px0, y: py0 - 2, width: px1 - px0, height: py1 - py0 + 4}))));

  // Grid and axes.
  const grid = s('g', {class: 'grid', 'aria-hidden': 'true'});
  const axes = s('g', {class: 'axes', 'aria-hidden': 'true'});
  for (const t of xs.ticks(spec.x.ticks || 8)) {
    const x = xs.map(t.v);
    grid.append(s('line', {x1: x, x2: x, y1: py0, y2: py1}));
    axes.append(s('line', {x1: x, x2: x, y1: py1, y2: py1 + 5, class: 'tick'}));
    axes.append(s('text', {x, y: py1 + 18, 'text-anchor': 'middle'}, t.label));
  }
  for (const t of ys.ticks(spec.y.ticks || 6)) {
    const y = ys.map(t.v);
    grid.append(s('line', {x1: px0, x2: px1, y1: y, y2: y}));
    axes.append(s('line', {x1: px0 - 5, x2: px0, y1: y, y2: y, class: 'tick'}));
    axes.append(s('text', {x: px0 - 8, y: y + 4, 'text-anchor': 'end'}, t.label));
  }
  axes.append(s('path', {d: `M${px0},${py0}V${py1}H${px1}`, class: 'frame'}));
  axes.append(s('text', {x: (px0 + px1) / 2, y: height - 6, 'text-anchor': 'middle', class: 'axis-label'},
      axisTitle(spec.x)));
  axes.append(s('text', {x: 14, y: (py0 + py1) / 2, 'text-anchor': 'middle', class: 'axis-label',
    transform: `rotate(-90 14 ${(py0 + py1) / 2})`}, axisTitle(spec.y)));
  if (y2s) {
    for (const t of y2s.ticks(spec.y2.ticks || 6)) {
      const y = y2s.map(t.v);
      axes.append(s('line', {x1: px1, x2: px1 + 5, y1: y, y2: y, class: 'tick'}));
      axes.append(s('text', {x: px1 + 8, y: y + 4, 'text-anchor': 'start'}, t.label));
    }
    axes.append(s('path', {d: `M${px1},${py0}V${py1}`, class: 'frame frame-y2'}));
    axes.append(s('text', {x: WIDTH - 12, y: (py0 + py1) / 2, 'text-anchor': 'middle', class: 'axis-label',
      transform: `rotate(90 ${WIDTH - 12} ${(py0 + py1) / 2})`}, axisTitle(spec.y2)));
  }
  svg.append(grid);

  // Layers.
  const body = s('g', {'clip-path': `url(#${clipId})`});
  const overlays = [];  // events sit over the frame, unclipped
  const drawn = {};
  for (const L of layers) {
    const g = s('g', {class: `layer layer-${L.name ? L.key || slug(L.name) : L.kind} ${L.cls || ''}`, 'aria-hidden': 'true'});
    const sy = scaleOf(L);
    if (L.kind === 'band') drawBand(g, L, xs, sy, hatchId);
    else if (L.kind === 'line') drawn[L.key || L.name] = drawLine(g, L, xs, sy);
    else if (L.kind === 'bars') drawBars(g, L, xs, sy, L.dx || 0);
    else if (L.kind === 'hline') drawHline(g, L, sy, px0, px1);
    else if (L.kind === 'events') drawEvents(g, L, xs, py0, py1);
    else if (L.kind === 'peaks') drawn[L.key || L.name] = drawPeaks(g, L, xs, sy, py1);
    if (L.kind === 'events') overlays.push(g);
    else body.append(g);
  }
  svg.append(body, ...overlays, axes);

  const fig = h('figure', {class: 'chart', dataset: {chart: spec.id}});
  fig.append(h('figcaption', null, h('h3', null, spec.title), h('p', {class: 'desc'}, spec.desc)));
  fig.append(svg);
  const legend = h('ul', {class: 'legend'});
  for (const L of layers) {
    if (!L.name || L.legend === false || !hasData(L)) continue;
    legend.append(h('li', null, sample(L), ' ', L.name));
  }
  fig.append(legend);
  if (spec.cursor) attachCursor(svg, fig, spec, drawn, WIDTH, py0, py1);
  if (spec.table) fig.append(lazyTable(spec));
  return fig;
}

// A legend entry only for what is drawn (no "baseline" before there is one).
function hasData(L) {
  if (L.kind === 'hline') return true;
  const ok = (v) => v !== null && v !== undefined && isFinite(v);
  return (L.data || []).some((p) => (L.kind === 'band' || L.kind === 'bars' ? ok(p.lo) && ok(p.hi) : L.kind === 'events' ? ok(p.x) : ok(p.y)));
}

function axisTitle(axis) {
  return axis.unit ? `${axis.label} [${axis.unit}]` : axis.label;
}

function slug(name) {
  return String(name).toLowerCase().replace(/[^a-z0-9]+/g, '-').replace(/^-|-$/g, '');
}

function drawLine(g, L, xs, sy) {
  let d = '', pen = false, count = 0;
  const pts = [];
  for (const p of L.data) {
    if (!xs.ok(p.x) || !sy.ok(p.y)) {
      pen = false;
      continue;
    }
    const x = xs.map(p.x), y = sy.map(p.y);
    d += (pen ? 'L' : 'M') + x.toFixed(1) + ',' + y.toFixed(1);
    pen = L.connect !== false;
    count += 1;
    pts.push({p, x, y});
  }
  if (L.connect !== false) {
    g.append(s('path', {d, class: 'line', 'stroke-dasharray': L.dash || null, dataset: {points: count}}));
  }
  if (L.marker) {
    for (const q of pts) g.append(s('path', {d: markerPath(L.marker, q.x, q.y), class: 'pt pt-mark'}));
  }
  g.dataset.points = count;
  return pts;
}

function drawBand(g, L, xs, sy, hatchId) {
  // One closed outline per run of points with both bounds.
  let d = '', run = [];
  const flush = () => {
    if (run.length === 0) return;
    if (run.length === 1) {  // a lone point: a narrow box so it still shows
      const q = run[0];
      d += `M${q.x - 2},${q.hi}H${q.x + 2}V${q.lo}H${q.x - 2}z`;
    } else {
      d += 'M' + run.map((q) => q.x.toFixed(1) + ',' + q.hi.toFixed(1)).join('L');
      d += 'L' + run.slice().reverse().map((q) => q.x.toFixed(1) + ',' + q.lo.toFixed(1)).join('L') + 'z';
    }
    run = [];
  };
  for (const p of L.data) {
    if (!xs.ok(p.x) || !sy.ok(p.lo) || !sy.ok(p.hi)) {
      flush();
      continue;
    }
    run.push({x: xs.map(p.x), lo: sy.map(p.lo), hi: sy.map(p.hi)});
  }
  flush();
  g.append(s('path', {d, class: 'band-fill'}));
  g.append(s('path', {d, class: 'band-hatch', fill: `url(#${hatchId})`}));
}

// dx: a horizontal offset in viewBox units, so two series' bars at the same
// x stay apart.
function drawBars(g, L, xs, sy, dx) {
  let d = '';
  for (const p of L.data) {
    if (!xs.ok(p.x) || !sy.ok(p.lo) || !sy.ok(p.hi)) continue;
    const x = xs.map(p.x) + dx, a = sy.map(p.lo).toFixed(1), b = sy.map(p.hi).toFixed(1);
    d += `M${x.toFixed(1)},${a}V${b}M${(x - 3).toFixed(1)},${a}h6M${(x - 3).toFixed(1)},${b}h6`;
  }
  g.append(s('path', {d, class: 'bars'}));
}

function drawHline(g, L, sy, px0, px1) {
  if (!sy.ok(L.y)) return;
  const y = sy.map(L.y);
  g.append(s('path', {d: `M${px0},${y}H${px1}`, class: 'line', 'stroke-dasharray': L.dash || null}));
  // Label above the line, or below it when the line runs along the top.
  const below = y < MARGIN.top + 16;
  if (L.label) g.append(s('text', {x: px1 - 6, y: below ? y + 14 : y - 5, 'text-anchor': 'end', class: 'hline-label'}, L.label));
}

// Events at the same time (two rules firing at one estimate) share one
// mark whose label lists them all.
function drawEvents(g, L, xs, py0, py1) {
  const groups = new Map();
  for (const e of L.data) {
    if (!xs.ok(e.x)) continue;
    if (!groups.has(e.x)) groups.set(e.x, []);
    groups.get(e.x).push(e);
  }
  for (const [t, list] of groups) {
    const x = xs.map(t);
    g.append(s('path', {d: `M${x},${py0}V${py1}`, class: 'ev-rule'}));
    for (const e of list) {
      const mark = s('path', {d: markerPath(L.marker || 'triangle', x, py1 - 7, 5), class: 'ev ev-mark'});
      mark.append(s('title', null, e.text || e.label));
      g.append(mark);
    }
    g.append(s('text', {x, y: py1 - 16, 'text-anchor': 'middle', class: 'ev-label'}, list.map((e) => e.label).join(' ')));
  }
}

function drawPeaks(g, L, xs, sy, py1) {
  const pts = [];
  for (const p of L.data) {
    if (!xs.ok(p.x) || !sy.ok(p.y)) continue;
    const x = xs.map(p.x), y = sy.map(p.y);
    g.append(s('path', {d: `M${x},${y + 6}V${py1}`, class: 'peak-rule'}));
    g.append(s('path', {d: markerPath(L.marker || 'diamond', x, y, 4.5), class: 'pt pt-mark'}));
    g.append(s('text', {x, y: y - 9, 'text-anchor': 'middle', class: 'peak-label'}, p.label));
    pts.push({p, x, y});
  }
  g.dataset.points = pts.length;
  return pts;
}

// ------------------------------------------------------------------ cursor

function attachCursor(svg, fig, spec, drawn, WIDTH, py0, py1) {
  const pts = drawn[spec.cursor.layer] || [];
  const readout = h('p', {class: 'readout', 'aria-live': 'polite'},
      pts.length ? 'Focus the chart (Tab) and use ←/→, Home/End' + (spec.cursor.activate ? ', Enter to open the point.' : '.') : 'No points.');
  fig.append(readout);
  if (!pts.length) return;
  const rule = s('path', {class: 'cursor-rule', d: '', 'aria-hidden': 'true'});
  const ring = s('circle', {class: 'cursor-ring', r: 7, cx: -99, cy: -99, 'aria-hidden': 'true'});
  svg.append(rule, ring);
  let index = -1;
  const show = (i) => {
    index = Math.max(0, Math.min(pts.length - 1, i));
    const q = pts[index];
    rule.setAttribute('d', `M${q.x},${py0}V${py1}`);
    ring.setAttribute('cx', q.x);
    ring.setAttribute('cy', q.y);
    readout.textContent = `${index + 1} of ${pts.length}: ${spec.cursor.describe(q.p)}`;
  };
  svg.addEventListener('keydown', (ev) => {
    const step = {ArrowRight: 1, ArrowUp: 1, ArrowLeft: -1, ArrowDown: -1,
      PageUp: Math.ceil(pts.length / 10), PageDown: -Math.ceil(pts.length / 10)}[ev.key];
    if (step !== undefined) show(index < 0 ? (step > 0 ? 0 : pts.length - 1) : index + step);
    else if (ev.key === 'Home') show(0);
    else if (ev.key === 'End') show(pts.length - 1);
    else if (ev.key === 'Enter' && index >= 0 && spec.cursor.activate) spec.cursor.activate(pts[index].p);
    else return;
    ev.preventDefault();
  });
  svg.addEventListener('focus', () => {
    if (index < 0) show(pts.length - 1);
  });
  const nearest = (ev) => {
    const box = svg.getBoundingClientRect();
    const x = ((ev.clientX - box.left) / box.width) * WIDTH;
    let best = 0;
    for (let i = 1; i < pts.length; i++) if (Math.abs(pts[i].x - x) < Math.abs(pts[best].x - x)) best = i;
    return best;
  };
  svg.addEventListener('mousemove', (ev) => show(nearest(ev)));
  if (spec.cursor.activate) {
    svg.classList.add('clickable');
    svg.addEventListener('click', (ev) => spec.cursor.activate(pts[nearest(ev)].p));
  }
}

// ------------------------------------------------------------------- table

// Built when first opened: a 730-row table is text nobody reads unless
// asked, and costs as much to lay out as the chart.
function lazyTable(spec) {
  const t = spec.table;
  const details = h('details', {class: 'data-table'},
      h('summary', null, `Data table (${t.rows.length} ${t.rows.length === 1 ? 'row' : 'rows'})`));
  details.addEventListener('toggle', () => {
    if (!details.open || details.querySelector('table')) return;
    const table = h('table', null, h('caption', null, spec.title));
    table.append(h('thead', null, h('tr', null, t.columns.map((c) => h('th', {scope: 'col'}, c.label)))));
    const tbody = h('tbody');
    for (const r of t.rows) tbody.append(h('tr', null, t.columns.map((c) => h('td', null, c.value(r)))));
    table.append(tbody);
    details.append(h('div', {class: 'table-scroll'}, table));
  });
  // The CSV beside the table (the whole series from the API, not only the
  // rows drawn).
  return t.csv ? h('div', {class: 'table-tools'}, details, csvButton(t.csv.path, t.csv.filename)) : details;
}

// A small inline trend (portfolio rows): the line with its end point
// marked, min and max in the accessible name.
export function sparkline(points, {width = 120, height = 28, label}) {
  const svg = s('svg', {viewBox: `0 0 ${width} ${height}`, width, height, class: 'spark', role: 'img', 'aria-label': label});
  svg.append(s('title', null, label));
  const vals = points.filter((p) => isFinite(p.y));
  if (vals.length === 0) {
    svg.append(s('text', {x: 2, y: height / 2 + 4, class: 'spark-none'}, 'no data'));
    return svg;
  }
  const x0 = Math.min(...vals.map((p) => p.x)), x1 = Math.max(...vals.map((p) => p.x));
  const y0 = Math.min(...vals.map((p) => p.y)), y1 = Math.max(...vals.map((p) => p.y));
  const X = (x) => 3 + (x1 > x0 ? ((x - x0) / (x1 - x0)) * (width - 6) : (width - 6) / 2);
  const Y = (y) => height - 4 - (y1 > y0 ? ((y - y0) / (y1 - y0)) * (height - 8) : (height - 8) / 2);
  svg.append(s('path', {d: vals.map((p, i) => (i ? 'L' : 'M') + X(p.x).toFixed(1) + ',' + Y(p.y).toFixed(1)).join(''), class: 'line'}));
  for (const p of vals) svg.append(s('path', {d: markerPath('circle', X(p.x), Y(p.y), 1.3), class: 'pt spark-pt'}));
  const last = vals[vals.length - 1];
  svg.append(s('path', {d: markerPath('square', X(last.x), Y(last.y), 2.6), class: 'spark-end'}));
  svg.dataset.points = vals.length;
  return svg;
}

export {sig};

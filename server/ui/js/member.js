// Member page: the force history with its 95 % interval and temperature on
// a second axis, the drift baseline and alert limits, alerts on the time
// axis; bending stiffness and end fixity histories; the member description
// drawn with its sensors; the member's alerts and latest estimates.
import {api, qs} from './api.js';
import {h, s, kN, kNm2, num, degC, when, ms, pct, sig, zoneLabel, toLocalInput, fromLocalInput} from './format.js';
import {plot} from './charts.js';
import {pageHeader, section, dl, cautionList, noticeBox, fill, csvButton, errorBox} from './shared.js';
import {roleAtLeast} from './api.js';

const DAY = 86400e3;
const RANGES = [
  ['30d', '30 days', 30 * DAY],
  ['90d', '90 days', 90 * DAY],
  ['1y', '1 year', 365 * DAY],
  ['2y', '2 years', 731 * DAY],
  ['all', 'All', null],
];

export async function render(main, [memberId], ctx) {
  const rangeKey = RANGES.some((r) => r[0] === ctx.params.get('range')) ? ctx.params.get('range') : '2y';
  const span = RANGES.find((r) => r[0] === rangeKey)[2];
  const from = new Date(span === null ? 0 : Date.now() - span).toISOString().replace(/\.\d+Z$/, 'Z');
  const window = qs({from});
  const [member, history, drift, fixity, alertList, logbook] = await Promise.all([
    api.get(`/v1/members/${memberId}`),
    api.get(`/v1/members/${memberId}/force/history${window}`),
    api.get(`/v1/members/${memberId}/drift${window}`),
    api.get(`/v1/members/${memberId}/fixity/history${window}`),
    api.get(`/v1/alerts${qs({member_id: memberId})}`),
    api.get(`/v1/members/${memberId}/logbook`),
  ]);
  ctx.fetched();
  if (ctx.stale()) return;
  const d = member.description;
  ctx.setTitle(member.external_id);
  const points = history.points;
  const latest = points.length ? points[points.length - 1] : null;

  // Alerts, labelled A1, A2, ... in time order, placed at their estimate.
  const timeOf = new Map(points.map((p) => [p.estimate_id, ms(p.measured_at)]));
  const alerts = alertList.alerts.slice().sort((a, b) => ms(a.raised_at) - ms(b.raised_at))
      .map((a, i) => ({...a, label: 'A' + (i + 1), at: timeOf.get(a.estimate_id) ?? ms(a.raised_at)}));

  // Logbook entries, labelled L1, L2, ... in time order, on the time axis.
  const entries = logbook.entries.map((e, i) => ({...e, label: 'L' + (i + 1), at: ms(e.occurred_at)}));
  const csv = {
    history: {path: `/v1/members/${memberId}/force/history${window}`, filename: `force-history-${member.external_id}.csv`},
    estimates: {path: `/v1/members/${memberId}/estimates${window}`, filename: `estimates-${member.external_id}.csv`},
  };

  const rangeNav = h('nav', {class: 'range', 'aria-label': 'Time range'}, h('span', {class: 'range-label'}, 'Range: '),
      RANGES.map(([key, label]) => h('a', {href: `#/members/${memberId}?range=${key}`, class: 'chip',
        'aria-current': key === rangeKey ? 'true' : null}, label)));

  const summary = latest
    ? dl([
      ['Latest force', h('span', null, h('strong', null, kN(latest.axial_force_n)), ` (95 %: ${num(latest.ci95_n[0] / 1000, 1)} to ${num(latest.ci95_n[1] / 1000, 1)} kN)`)],
      d.design_axial_force_n ? ['Force ratio N / N design', forceRatioText(latest, d.design_axial_force_n)] : null,
      ['Measured', h('a', {href: `#/estimates/${latest.estimate_id}`}, when(latest.measured_at))],
      ['Estimates shown', String(points.length) + (history.truncated ? ' (truncated)' : '')],
      ['Open alerts', String(alerts.filter((a) => a.state === 'open').length)],
    ])
    : h('p', null, 'No estimate in this range. ', h('a', {href: '#/upload'}, 'Upload a record'), '.');

  fill(main,
      pageHeader(member.external_id, [{label: 'Structures', href: '#/'},
        {label: 'Portfolio', href: `#/structures/${member.structure_id}`}, {label: member.external_id}],
      `Member description version ${member.version}`),
      summary, rangeNav,
      section('Axial force', forceChart(points, drift, d, alerts, entries, csv.history), driftSummary(drift)),
      section('Bending stiffness and end fixity', eiChart(points, drift, entries, csv.estimates), fixityChart(fixity.points, csv.estimates)),
      section('Logbook', logbookPanel(memberId, entries, ctx)),
      section('Member', memberDrawing(d), memberFacts(d)),
      section('Alerts', alertsList(alerts)),
      section('Latest estimates', latestList(points), csvButton(csv.estimates.path, csv.estimates.filename)),
      noticeBox(drift.notice));
}

// ------------------------------------------------------------------ force

// N / N_design and its 95 % interval: for a tie a low ratio is the danger.
export function forceRatioText(p, design) {
  const a = p.ci95_n[0] / design, b = p.ci95_n[1] / design;
  return `${num(p.axial_force_n / design, 2)} (95 %: ${num(Math.min(a, b), 2)} to ${num(Math.max(a, b), 2)}) of ${kN(design)}`;
}

// Logbook marks on a time chart (squares, labelled L1, L2, ...).
function logLayer(entries) {
  return {kind: 'events', name: 'Logbook entry (L1, L2, …)', key: 'logbook', cls: 's-log', marker: 'square',
    data: entries.map((e) => ({x: e.at, label: e.label,
      text: `${e.label} ${e.kind}${e.new_baseline ? ' (new baseline)' : ''}, ${when(e.occurred_at)}, ${e.author}: ${e.note}`}))};
}

function forceChart(points, drift, d, alerts, entries, csv) {
  const limits = new Map(drift.points.map((p) => [p.estimate_id, p]));
  const kn = (v) => (v === null || v === undefined ? null : v / 1000);
  const rows = points.map((p) => {
    const q = limits.get(p.estimate_id) || {};
    return {...p, t: ms(p.measured_at), expected: q.force_expected_n ?? null, lim: q.force_limits_n || null,
      z: q.force_z ?? null, in_baseline: q.in_baseline, excluded: !!q.excluded};
  });
  const th = drift.force.thresholds;
  const first = rows.length ? rows[0] : null, last = rows.length ? rows[rows.length - 1] : null;
  const desc = rows.length
    ? `${rows.length} estimates from ${when(first.measured_at)} to ${when(last.measured_at)}; axial force from ` +
      `${kN(Math.min(...rows.map((r) => r.axial_force_n)))} to ${kN(Math.max(...rows.map((r) => r.axial_force_n)))}` +
      `, latest ${kN(last.axial_force_n)}. ${alerts.length} ${alerts.length === 1 ? 'alert' : 'alerts'} marked.`
    : 'No estimates in this range.';
  return plot({
    id: 'force',
    title: 'Axial force and temperature',
    desc,
    height: 340,
    x: {type: 'time', label: 'Time (UTC)'},
    y: {label: 'Axial force', unit: 'kN'},
    y2: {label: 'Temperature', unit: '°C'},
    layers: [
      {kind: 'band', name: '95 % interval', key: 'interval', cls: 's-interval', data: rows.map((r) => ({x: r.t, lo: kn(r.ci95_n[0]), hi: kn(r.ci95_n[1])}))},
      {kind: 'line', name: `Alert limits (|z| = ${drift.settings.z_threshold})`, key: 'limits', cls: 's-limit', dash: '7 4', extent: false,
        data: rows.map((r) => ({x: r.t, y: r.lim ? kn(r.lim[0]) : null}))},
      {kind: 'line', key: 'limits-upper', cls: 's-limit', dash: '7 4', legend: false, extent: false,
        data: rows.map((r) => ({x: r.t, y: r.lim ? kn(r.lim[1]) : null}))},
      {kind: 'line', name: 'Baseline at the record temperature', key: 'baseline', cls: 's-baseline', dash: '2 3',
        data: rows.map((r) => ({x: r.t, y: kn(r.expected)}))},
      th.below_design_n !== null ? {kind: 'hline', name: 'Low-force alert threshold', key: 'low', cls: 's-threshold', dash: '10 3 2 3', y: kn(th.below_design_n),
        label: `${pct(drift.settings.min_force_share_of_design)} of design`} : null,
      d.design_axial_force_n ? {kind: 'hline', name: 'Design force', key: 'design', cls: 's-design', dash: '1 0', y: kn(d.design_axial_force_n), label: 'design'} : null,
      {kind: 'line', name: 'Temperature (right axis)', key: 'temperature', cls: 's-temperature', axis: 'y2', dash: '5 3', marker: 'square',
        data: rows.map((r) => ({x: r.t, y: r.temperature_c}))},
      {kind: 'line', name: 'Axial force', key: 'force', cls: 's-force', marker: 'circle',
        data: rows.map((r) => ({x: r.t, y: kn(r.axial_force_n), row: r}))},
      {kind: 'events', name: 'Alert (A1, A2, …)', key: 'alerts', cls: 's-alert',
        data: alerts.map((a) => ({x: a.at, label: a.label, text: `${a.label} ${a.rule} (${a.state}): ${a.message}`}))},
      logLayer(entries),
    ],
    cursor: {
      layer: 'force',
      describe: (p) => {
        const r = p.row;
        return `${when(r.measured_at)}: ${kN(r.axial_force_n)} (95 %: ${num(r.ci95_n[0] / 1000, 1)} to ${num(r.ci95_n[1] / 1000, 1)} kN), ` +
          `${degC(r.temperature_c)}` + (r.expected !== null ? `, baseline ${kN(r.expected)}` : '') +
          (r.z !== null ? `, z = ${num(r.z, 1)}` : '') + (r.in_baseline ? ', in the baseline' : '') +
          (r.excluded ? ', judged unusable: left out of the baseline and the rules' : '');
      },
      activate: (p) => (location.hash = `#/estimates/${p.row.estimate_id}`),
    },
    table: {
      rows,
      csv,
      columns: [
        {label: `Measured (${zoneLabel()})`, value: (r) => h('a', {href: `#/estimates/${r.estimate_id}`}, when(r.measured_at))},
        {label: 'Force [kN]', value: (r) => num(r.axial_force_n / 1000, 2)},
        {label: '95 % interval [kN]', value: (r) => `${num(r.ci95_n[0] / 1000, 2)} to ${num(r.ci95_n[1] / 1000, 2)}`},
        {label: 'Temperature [°C]', value: (r) => num(r.temperature_c, 1)},
        {label: 'Baseline [kN]', value: (r) => num(kn(r.expected), 2)},
        {label: 'Alert limits [kN]', value: (r) => (r.lim ? `${num(r.lim[0] / 1000, 2)} to ${num(r.lim[1] / 1000, 2)}` : '–')},
        {label: 'z', value: (r) => num(r.z, 2)},
        {label: 'Drift rules', value: (r) => (r.excluded ? 'left out (unusable)' : r.in_baseline ? 'baseline' : 'judged')},
      ],
    },
  });
}

function driftSummary(drift) {
  const b = drift.force.baseline;
  const text = b
    ? `Baseline: ${b.points} estimates (${when(b.first_at)} to ${when(b.last_at)}), ${kN(b.intercept_n, 2)} at ${num(b.mean_temperature_c, 1)} °C` +
      (b.temperature_slope ? `, ${num(b.slope_n_per_c / 1000, 3)} kN per K` : ', no temperature slope') +
      `, residual scatter ${kN(b.residual_std_n, 2)}. A point beyond the alert limits counts towards the ` +
      `residual rule (${drift.settings.consecutive} in a row raise an alert).`
    : `No baseline yet: the first ${drift.settings.baseline_count} estimates form it; until then only the absolute rules apply.`;
  return h('div', {class: 'drift-summary'}, h('p', null, text), cautionList(drift.cautions, 'The drift analysis raised no caution.'));
}

// ----------------------------------------------------- EI and fixity

function eiChart(points, drift, entries, csv) {
  const lim = new Map(drift.points.map((p) => [p.estimate_id, p]));
  const k = (v) => (v === null || v === undefined ? null : v / 1000);
  const rows = points.map((p) => ({...p, t: ms(p.measured_at), expected: (lim.get(p.estimate_id) || {}).ei_expected_nm2 ?? null}));
  const withEi = rows.filter((r) => r.bending_stiffness_nm2 !== null);
  const th = drift.bending_stiffness.thresholds;
  return plot({
    id: 'ei',
    title: 'Bending stiffness EI',
    desc: withEi.length ? `${withEi.length} estimates of EI from ${kNm2(Math.min(...withEi.map((r) => r.bending_stiffness_nm2)))} to ` +
      `${kNm2(Math.max(...withEi.map((r) => r.bending_stiffness_nm2)))}; nominal ${kNm2(drift.nominal_bending_stiffness_nm2)}.` : 'No EI estimates in this range.',
    height: 240,
    x: {type: 'time', label: 'Time (UTC)'},
    y: {label: 'EI', unit: 'kN·m²'},
    layers: [
      {kind: 'band', name: '±1.96 σ', key: 'ei-interval', cls: 's-interval',
        data: withEi.map((r) => ({x: r.t, lo: k(r.bending_stiffness_nm2 - 1.96 * (r.bending_stiffness_std_nm2 || 0)), hi: k(r.bending_stiffness_nm2 + 1.96 * (r.bending_stiffness_std_nm2 || 0))}))},
      {kind: 'line', name: 'Baseline at the record temperature', key: 'ei-baseline', cls: 's-baseline', dash: '2 3', data: rows.map((r) => ({x: r.t, y: k(r.expected)}))},
      {kind: 'hline', name: 'Nominal E·I', key: 'nominal', cls: 's-design', y: k(drift.nominal_bending_stiffness_nm2), label: 'nominal'},
      th.loss_nm2 !== null ? {kind: 'hline', name: 'Stiffness-loss alert threshold', key: 'loss', cls: 's-threshold', dash: '10 3 2 3', y: k(th.loss_nm2),
        label: `${pct(1 - drift.settings.max_ei_loss_share)} of nominal`} : null,
      {kind: 'line', name: 'EI', key: 'ei', cls: 's-ei', marker: 'diamond', data: withEi.map((r) => ({x: r.t, y: k(r.bending_stiffness_nm2), row: r}))},
      logLayer(entries),
    ],
    cursor: {
      layer: 'ei',
      describe: (p) => `${when(p.row.measured_at)}: EI ${kNm2(p.row.bending_stiffness_nm2)} ± ${kNm2(p.row.bending_stiffness_std_nm2 || 0)} (1 σ)`,
      activate: (p) => (location.hash = `#/estimates/${p.row.estimate_id}`),
    },
    table: {rows: withEi, csv, columns: [
      {label: `Measured (${zoneLabel()})`, value: (r) => when(r.measured_at)},
      {label: 'EI [kN·m²]', value: (r) => num(r.bending_stiffness_nm2 / 1000, 3)},
      {label: 'σ [kN·m²]', value: (r) => num((r.bending_stiffness_std_nm2 || 0) / 1000, 3)},
    ]},
  });
}

function fixityChart(points, csv) {
  const rows = points.map((p) => ({...p, t: ms(p.measured_at)}));
  const side = (r, k) => r[k] || {};
  const bars = (k) => rows.filter((r) => side(r, k).ci95).map((r) => ({x: r.t, lo: side(r, k).ci95[0], hi: side(r, k).ci95[1]}));
  const fixedNote = (k) => (rows.length && rows.every((r) => side(r, k).fixed) ? ' (fixed by the description)' : '');
  return plot({
    id: 'fixity',
    title: 'End fixity factors',
    desc: rows.length ? `${rows.length} estimates; fixity r from 0 (pinned) to 1 (clamped) at the left and right ends, with 95 % intervals.` : 'No estimates in this range.',
    height: 240,
    x: {type: 'time', label: 'Time (UTC)'},
    y: {label: 'Fixity factor r (0 pinned, 1 clamped)', min: 0, max: 1},
    layers: [
      {kind: 'bars', name: '95 % interval, left', key: 'left-ci', cls: 's-left', dx: -2.5, data: bars('left')},
      {kind: 'bars', name: '95 % interval, right', key: 'right-ci', cls: 's-right', dx: 2.5, data: bars('right')},
      {kind: 'line', name: 'Left end' + fixedNote('left'), key: 'left', cls: 's-left', marker: 'triangle', data: rows.map((r) => ({x: r.t, y: side(r, 'left').value ?? null, row: r}))},
      {kind: 'line', name: 'Right end' + fixedNote('right'), key: 'right', cls: 's-right', marker: 'square', dash: '5 3', data: rows.map((r) => ({x: r.t, y: side(r, 'right').value ?? null, row: r}))},
    ],
    cursor: {
      layer: 'left',
      describe: (p) => `${when(p.row.measured_at)}: left ${fx(p.row.left)}, right ${fx(p.row.right)}`,
      activate: (p) => (location.hash = `#/estimates/${p.row.estimate_id}`),
    },
    table: {rows, csv, columns: [
      {label: `Measured (${zoneLabel()})`, value: (r) => when(r.measured_at)},
      {label: 'Left r', value: (r) => fx(r.left)},
      {label: 'Right r', value: (r) => fx(r.right)},
    ]},
  });
}

function fx(q) {
  if (!q) return '–';
  if (q.fixed) return `${num(q.value, 2)} (fixed)`;
  return `${num(q.value, 2)} (95 %: ${num(q.ci95[0], 2)} to ${num(q.ci95[1], 2)})`;
}

// ------------------------------------------------------ the member drawn

// Geometry of docs/FORMATS.md section 1: area and second moment in the vertical plane.
function sectionProps(sec) {
  if (sec.shape === 'circle') return {A: Math.PI * sec.diameter_m ** 2 / 4, I: Math.PI * sec.diameter_m ** 4 / 64,
    text: `circle, d = ${num(sec.diameter_m * 1000, 1)} mm`};
  if (sec.shape === 'rectangle') return {A: sec.width_m * sec.depth_m, I: sec.width_m * sec.depth_m ** 3 / 12,
    text: `rectangle ${num(sec.width_m * 1000, 1)} × ${num(sec.depth_m * 1000, 1)} mm (width × depth)`};
  return {A: sec.area_m2, I: sec.second_moment_m4, text: 'general section'};
}

function rotationText(end) {
  const r = end && end.rotation !== undefined ? end.rotation : 'elastic';
  if (typeof r === 'object') return `spring ${sig(r.stiffness_nm_per_rad)} N·m/rad`;
  return {pinned: 'pinned', clamped: 'clamped', elastic: 'elastic (fixity identified)'}[r] || r;
}

function axialText(a) {
  if (a === undefined || a === 'fixed') return 'axially fixed ends';
  if (a === 'free') return 'axially free (no stretching)';
  return `axial support spring ${sig(a.stiffness_n_per_m)} N/m`;
}

export function memberDrawing(d) {
  const W = 860, H = 190, x0 = 90, x1 = W - 90, y = 88;
  const X = (pos) => x0 + (pos / d.length_m) * (x1 - x0);
  const sensors = d.sensors || [];
  const svg = s('svg', {viewBox: `0 0 ${W} ${H}`, class: 'member-drawing', role: 'img', 'aria-labelledby': 'md-t md-d'});
  svg.append(s('title', {id: 'md-t'}, `Member ${d.id}`));
  svg.append(s('desc', {id: 'md-d'}, `A ${num(d.length_m, 2)} m member, left end ${rotationText(d.ends && d.ends.left)}, right end ` +
    `${rotationText(d.ends && d.ends.right)}, ${axialText(d.ends && d.ends.axial)}; ${sensors.length} sensors: ` +
    sensors.map((x) => `${x.channel} at ${num(x.position_m, 2)} m (${x.direction || 'vertical'})`).join(', ') + '.'));
  const defs = s('defs', null, s('pattern', {id: 'md-wall', patternUnits: 'userSpaceOnUse', width: 6, height: 6, patternTransform: 'rotate(45)'},
      s('line', {x1: 0, y1: 0, x2: 0, y2: 6, class: 'hatch-line'})));
  svg.append(defs);
  const endShape = (end, x, dir) => {
    const r = end && end.rotation !== undefined ? end.rotation : 'elastic';
    const g = s('g', {class: 'support'});
    if (r === 'clamped') {
      g.append(s('rect', {x: dir < 0 ? x - 16 : x, y: y - 34, width: 16, height: 68, fill: 'url(#md-wall)', class: 'wall'}));
      g.append(s('path', {d: `M${x},${y - 34}V${y + 34}`, class: 'wall-edge'}));
    } else {
      g.append(s('path', {d: `M${x},${y}L${x - 14},${y + 24}H${x + 14}Z`, class: 'pin-base'}));
      g.append(s('path', {d: `M${x - 20},${y + 30}H${x + 20}`, class: 'ground'}));
      g.append(s('circle', {cx: x, cy: y, r: 4.5, class: 'pin'}));
      if (r !== 'pinned') {  // rotational spring: a coil beside the pin
        const cx = x + dir * 20;
        g.append(s('path', {d: `M${x},${y - 4}C${cx},${y - 24} ${cx + dir * 14},${y - 4} ${cx},${y + 2}S${x + dir * 6},${y - 12} ${x + dir * 10},${y - 14}`, class: 'spring'}));
      }
    }
    g.append(s('text', {x, y: y + 52, 'text-anchor': 'middle', class: 'end-label'}, rotationText(end)));
    return g;
  };
  svg.append(endShape(d.ends && d.ends.left, x0, -1), endShape(d.ends && d.ends.right, x1, 1));
  svg.append(s('path', {d: `M${x0},${y}H${x1}`, class: 'member-bar'}));
  for (const sn of sensors) {
    const x = X(sn.position_m);
    const g = s('g', {class: 'sensor', dataset: {channel: sn.channel}});
    g.append(s('rect', {x: x - 6, y: y - 6, width: 12, height: 12, class: 'sensor-box'}));
    if ((sn.direction || 'vertical') === 'vertical') g.append(s('path', {d: `M${x},${y - 30}V${y - 12}M${x - 4},${y - 25}L${x},${y - 31}L${x + 4},${y - 25}`, class: 'dir'}));
    else g.append(s('circle', {cx: x, cy: y - 22, r: 5, class: 'dir'}), s('circle', {cx: x, cy: y - 22, r: 1.4, class: 'dir-dot'}));
    g.append(s('text', {x, y: y - 38, 'text-anchor': 'middle', class: 'sensor-label'}, sn.channel));
    g.append(s('text', {x, y: y + 22, 'text-anchor': 'middle', class: 'sensor-pos'}, `${num(sn.position_m, 2)} m`));
    svg.append(g);
  }
  svg.append(s('path', {d: `M${x0},${H - 18}H${x1}M${x0},${H - 24}V${H - 12}M${x1},${H - 24}V${H - 12}`, class: 'dimension'}));
  svg.append(s('text', {x: (x0 + x1) / 2, y: H - 22, 'text-anchor': 'middle', class: 'dimension-label'}, `L = ${num(d.length_m, 2)} m`));
  const legend = h('p', {class: 'help'}, '↑ sensor measuring vertical vibration, ⊙ lateral (out of the drawing plane). ',
      'Drawn along its axis; inclination ', num(d.inclination_deg || 0, 1), '° to the horizontal; ', axialText(d.ends && d.ends.axial), '.');
  return h('figure', {class: 'chart', dataset: {chart: 'member'}}, svg, legend);
}

function memberFacts(d) {
  const p = sectionProps(d.section);
  const E = d.material.elastic_modulus_pa, rho = d.material.density_kg_m3;
  return dl([
    ['Length', `${num(d.length_m, 3)} m`],
    ['Section', p.text],
    ['Area A', `${sig(p.A * 1e6, 4)} mm²`],
    ['Second moment I (vertical plane)', `${sig(p.I * 1e12, 4)} mm⁴`],
    ['Elastic modulus E', `${num(E / 1e9, 1)} GPa`],
    ['Density', `${num(rho, 0)} kg/m³ (mass ${num(rho * p.A, 2)} kg/m)`],
    ['Nominal EI', kNm2(E * p.I)],
    ['Slenderness L/r', num(d.length_m / Math.sqrt(p.I / p.A), 0)],
    ['Design force', d.design_axial_force_n ? kN(d.design_axial_force_n) : 'not given'],
  ]);
}

// ----------------------------------------------------------- logbook

const LOG_KINDS = [['inspected', 'Inspected'], ['re-tensioned', 'Re-tensioned'], ['sensor-replaced', 'Sensor replaced'],
  ['repaired', 'Repaired'], ['other', 'Other']];

function logbookPanel(memberId, entries, ctx) {
  const list = entries.length
    ? h('table', {class: 'compact', id: 'logbook'}, h('caption', null, 'What was done to the member, oldest first'),
        h('thead', null, h('tr', null, ['', `When (${zoneLabel()})`, 'Kind', 'By', 'Note', 'Baseline'].map((t) => h('th', {scope: 'col'}, t)))),
        h('tbody', null, entries.map((e) => h('tr', {dataset: {entry: e.id}},
            h('td', null, h('span', {class: 'log-label'}, e.label)), h('td', null, when(e.occurred_at)),
            h('td', null, e.kind), h('td', null, e.author), h('td', null, e.note || '–'),
            h('td', null, e.new_baseline ? 'new baseline from here' : '–')))))
    : h('p', {class: 'muted', id: 'logbook'}, 'No logbook entries for this member.');
  const tools = h('p', null, csvButton(`/v1/members/${memberId}/logbook`, `logbook-${memberId}.csv`));
  if (!roleAtLeast(ctx.me.role, 'upload')) {
    return [list, tools, h('p', {class: 'help'}, 'Adding entries needs an upload or admin token.')];
  }
  const kind = h('select', {id: 'log-kind', name: 'kind'}, LOG_KINDS.map(([v, t]) => h('option', {value: v}, t)));
  const when_ = h('input', {id: 'log-when', name: 'occurred_at', type: 'datetime-local', required: true, value: toLocalInput(Date.now())});
  const author = h('input', {id: 'log-author', name: 'author', type: 'text', required: true, maxlength: 200, autocomplete: 'name'});
  const note = h('textarea', {id: 'log-note', name: 'note', rows: 2, maxlength: 4000});
  const baseline = h('input', {id: 'log-baseline', name: 'new_baseline', type: 'checkbox'});
  const status = h('div', {id: 'log-status', 'aria-live': 'assertive'});
  const form = h('form', {class: 'logbook-form', novalidate: true},
      h('p', null, h('label', {for: 'log-kind'}, 'Kind'), h('br'), kind),
      h('p', null, h('label', {for: 'log-when'}, `When (${zoneLabel()})`), h('br'), when_),
      h('p', null, h('label', {for: 'log-author'}, 'By'), h('br'), author),
      h('p', {class: 'wide'}, h('label', {for: 'log-note'}, 'Note'), h('br'), note),
      h('p', {class: 'wide'}, baseline, h('label', {for: 'log-baseline'},
          ' Start a new drift baseline from this time (after re-tensioning or a repair the old level no longer applies)')),
      h('p', null, h('button', {type: 'submit', class: 'primary', id: 'log-send'}, 'Add to the logbook')), status);
  form.addEventListener('submit', async (ev) => {
    ev.preventDefault();
    status.replaceChildren();
    if (!author.value.trim() || !when_.value) {
      status.append(errorBox({message: 'Say who did it and when.'}, 'Not added'));
      return;
    }
    try {
      await api.post(`/v1/members/${memberId}/logbook`, JSON.stringify({kind: kind.value, occurred_at: fromLocalInput(when_.value),
        author: author.value.trim(), note: note.value, new_baseline: baseline.checked}), 'application/json');
      ctx.reload();
    } catch (err) {
      status.append(errorBox(err, 'Not added'));
    }
  });
  return [list, tools, h('h3', null, 'New entry'), form];
}

// ----------------------------------------------------------- lists

function alertsList(alerts) {
  if (!alerts.length) return h('p', {class: 'muted', id: 'member-alerts'}, 'No alerts for this member.');
  return h('ul', {class: 'alert-list', id: 'member-alerts'}, alerts.slice().reverse().map((a) => h('li', {class: `alert-item state-${a.state}`},
      h('span', {class: 'alert-label'}, a.label), ' ', h('strong', null, a.rule), ' · ', h('span', {class: 'state'}, a.state),
      ' · raised ', when(a.raised_at), h('br'), a.message, ' ',
      h('a', {href: `#/alerts?member_id=${a.member_id}`}, 'Evidence and actions'))));
}

function latestList(points) {
  if (!points.length) return h('p', {class: 'muted'}, 'No estimates in this range.');
  const recent = points.slice(-10).reverse();
  return h('table', {class: 'compact'}, h('caption', null, 'The ten most recent estimates in the range'),
      h('thead', null, h('tr', null, [`Measured (${zoneLabel()})`, 'Force', '95 % interval', 'Temperature'].map((t) => h('th', {scope: 'col'}, t)))),
      h('tbody', null, recent.map((p) => h('tr', null,
          h('td', null, h('a', {href: `#/estimates/${p.estimate_id}`}, when(p.measured_at))),
          h('td', {class: 'num'}, kN(p.axial_force_n, 2)),
          h('td', {class: 'num'}, `${num(p.ci95_n[0] / 1000, 2)} to ${num(p.ci95_n[1] / 1000, 2)} kN`),
          h('td', {class: 'num'}, degC(p.temperature_c))))));
}

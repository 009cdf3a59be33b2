// Portfolio of one structure: a row per member with the latest force and
// its 95 % interval, the force ratio N / N_design with its interval (for a
// tie a LOW ratio is the danger), the 30-day change with its interval,
// time since the last record and open alerts by tier. Sortable by every
// column; members with open alerts stay on top unless the reader unticks
// it. The row cells are shared with the organisation-wide triage.
import {api} from './api.js';
import {h, kN, ago, when, ms, num} from './format.js';
import {sparkline} from './charts.js';
import {pageHeader, section, noticeBox, fill, csvButton} from './shared.js';

const COLUMNS = [
  {key: 'member', label: 'Member', value: (r) => r.external_id, text: true},
  {key: 'alerts', label: 'Open alerts', value: (r) => r.open_alerts},
  {key: 'force', label: 'Latest force (95 % interval)', value: (r) => (r.latest ? r.latest.axial_force_n : null)},
  {key: 'ratio', label: 'Force ratio N / N design (95 %)', value: (r) => (r.force_ratio ? r.force_ratio.value : null)},
  {key: 'trend', label: 'Change over 30 days (95 %)', value: (r) => (r.change_30d ? r.change_30d.value_n : null)},
  {key: 'last', label: 'Last record', value: (r) => (r.last_record_at ? ms(r.last_record_at) : null)},
];

export async function render(main, [structureId], ctx) {
  const data = await api.get(`/v1/structures/${structureId}/portfolio`);
  // 30-day histories for the inline trends, all at once.
  const histories = await Promise.all(data.members.map((m) => api.get(`/v1/members/${m.member_id}/force/history`)));
  ctx.fetched();
  if (ctx.stale()) return;
  const rows = data.members.map((m, i) => ({...m, trend: histories[i].points.map((p) => ({x: ms(p.measured_at), y: p.axial_force_n}))}));
  ctx.setTitle(data.structure.name);
  const state = {key: 'member', dir: 1, alertsFirst: true};
  const table = h('table', {class: 'portfolio', id: 'portfolio'});
  const caption = h('caption', null, `Members of ${data.structure.name}`);
  const toggle = h('input', {type: 'checkbox', id: 'alerts-first', checked: true});
  const live = h('p', {class: 'visually-hidden', 'aria-live': 'polite'});
  toggle.addEventListener('change', () => {
    state.alertsFirst = toggle.checked;
    draw();
  });

  function sorted() {
    const col = COLUMNS.find((c) => c.key === state.key);
    return rows.slice().sort((a, b) => {
      if (state.alertsFirst && (a.open_alerts > 0) !== (b.open_alerts > 0)) return a.open_alerts > 0 ? -1 : 1;
      const va = col.value(a), vb = col.value(b);
      if (va === null && vb === null) return 0;
      if (va === null) return 1;  // missing values last in either direction
      if (vb === null) return -1;
      const c = col.text ? String(va).localeCompare(String(vb)) : va - vb;
      return c * state.dir || a.external_id.localeCompare(b.external_id);
    });
  }

  function head() {
    return h('thead', null, h('tr', null, COLUMNS.map((c) => {
      const active = state.key === c.key;
      const sort = active ? (state.dir > 0 ? 'ascending' : 'descending') : 'none';
      const button = h('button', {type: 'button', class: 'sort', dataset: {key: c.key},
        onclick: () => {
          state.dir = state.key === c.key ? -state.dir : c.text ? 1 : -1;
          state.key = c.key;
          draw();
          live.textContent = `Sorted by ${c.label}, ${state.dir > 0 ? 'ascending' : 'descending'}.`;
          table.querySelector(`button[data-key="${c.key}"]`).focus();
        }},
      c.label, h('span', {class: 'sort-mark', 'aria-hidden': 'true'}, active ? (state.dir > 0 ? ' ▲' : ' ▼') : ' ◇'));
      return h('th', {scope: 'col', 'aria-sort': sort}, button);
    })));
  }

  function draw() {
    const body = h('tbody', null, sorted().map(row));
    table.replaceChildren(caption, head(), body);
  }
  draw();

  fill(main,
      pageHeader(data.structure.name, [{label: 'Structures', href: '#/'}, {label: data.structure.name}],
          data.structure.description || null),
      h('p', {class: 'page-actions'}, h('a', {class: 'button', id: 'report-link', href: `#/structures/${structureId}/report`},
          h('span', {'aria-hidden': 'true'}, '▤ '), 'Inspection report')),
      section('Portfolio',
          h('p', {class: 'controls'}, toggle, h('label', {for: 'alerts-first'}, ' Members with open alerts first'), ' ',
              csvButton(`/v1/structures/${structureId}/portfolio`, `portfolio-${structureId}.csv`)),
          h('div', {class: 'table-scroll'}, table), live,
          h('p', {class: 'help'}, RATIO_HELP)),
      noticeBox('Estimates support inspection planning; they do not replace assessment by a licensed structural engineer under the local codes.'));
}

export const RATIO_HELP = 'Force ratio: the latest usable force divided by the design force of the member description, ' +
  'with its 95 % interval. For a tie or hanger a LOW ratio is the danger (slack, slip, lost pretension). ' +
  'The 30-day change is the latest usable force minus the earliest usable one of the 30 days before it, with the 95 % ' +
  'interval of a difference of two independent estimates; it is not temperature-compensated (the member page is). ' +
  'The trend shows every estimate of the last 30 days; its square marks the latest.';

// Open alerts by tier: "alert" (beyond the limit with 95 % confidence, or
// a drift rule) and "watch" (the interval straddles a limit).
export function alertsCell(r) {
  const t = r.open_alerts_by_tier || {alert: r.open_alerts, watch: 0};
  if (!r.open_alerts) return h('span', {class: 'muted'}, 'none');
  return h('a', {class: 'flag flag-alert', href: `#/alerts?member_id=${r.member_id}`},
      t.alert ? [h('span', {class: 'tier tier-alert'}, h('span', {'aria-hidden': 'true'}, '▲ '), `${t.alert} alert`)] : null,
      t.alert && t.watch ? ' · ' : null,
      t.watch ? [h('span', {class: 'tier tier-watch'}, h('span', {'aria-hidden': 'true'}, '△ '), `${t.watch} watch`)] : null,
      ` (${r.open_alerts} open)`);
}

export function forceCell(latest) {
  if (!latest) return h('span', {class: 'muted'}, 'no estimate yet');
  const v = latest.verdict;
  return [h('strong', null, kN(latest.axial_force_n)), h('br'),
    h('span', {class: 'interval'}, `${num(latest.ci95_n[0] / 1000, 1)} to ${num(latest.ci95_n[1] / 1000, 1)} kN`),
    v && v.code !== 'usable' ? h('span', {class: `verdict verdict-${v.code}`, title: v.summary || ''}, ` · ${v.code}`) : null,
    latest.cautions && latest.cautions.length
      ? h('span', {class: 'caution-count', title: latest.cautions.map((c) => c.code).join(', ')},
          ` · △ ${latest.cautions.length} ${latest.cautions.length === 1 ? 'caution' : 'cautions'}`)
      : null];
}

export function ratioCell(r) {
  const cc = r.critical_compression;
  const ncr = cc ? h('span', {class: 'ncr interval', title: 'Critical compression (Euler load with the identified end restraint), 95 % interval'},
    h('br'), `N cr ${kN(cc.value_n)} (${num(cc.ci95_n[0] / 1000, 1)} to ${num(cc.ci95_n[1] / 1000, 1)})`) : null;
  if (!r.force_ratio) return [h('span', {class: 'muted'}, r.design_axial_force_n ? 'no usable estimate' : 'no design force'), ncr];
  return [ratioBar(r.force_ratio), ncr];
}

export function changeCell(r) {
  const c = r.change_30d;
  if (!c) return h('span', {class: 'muted'}, 'fewer than 2 usable estimates');
  const sign = (v) => (v >= 0 ? '+' : '−') + kN(Math.abs(v));
  return h('span', {class: 'trend-change'}, sign(c.value_n), h('br'),
      h('span', {class: 'interval'}, `${sign(c.ci95_n[0])} to ${sign(c.ci95_n[1])}`));
}

function row(r) {
  const trendLabel = r.trend.length
    ? `30-day trend of ${r.external_id}: ${r.trend.length} estimates, from ${kN(r.trend[0].y)} to ${kN(r.trend[r.trend.length - 1].y)}`
    : `30-day trend of ${r.external_id}: no estimates`;
  const t = r.open_alerts_by_tier || {alert: 0, watch: 0};
  return h('tr', {class: t.alert ? 'has-alert' : t.watch ? 'has-watch' : null, dataset: {member: r.member_id}},
      h('th', {scope: 'row'}, h('a', {href: `#/members/${r.member_id}`}, r.external_id)),
      h('td', null, alertsCell(r)),
      h('td', {class: 'num'}, forceCell(r.latest)),
      h('td', null, ratioCell(r)),
      h('td', null, sparkline(r.trend, {label: trendLabel}), ' ', changeCell(r)),
      h('td', null, r.last_record_at ? h('time', {datetime: r.last_record_at, title: when(r.last_record_at)}, ago(r.last_record_at)) : h('span', {class: 'muted'}, 'never')));
}

// The force ratio on a 0 to 1.25 scale: the interval as a bar segment,
// the value as a tick, the 1.0 (design) mark; the numbers are printed
// beside it, so the drawing is never the only carrier of the value.
export function ratioBar(fr) {
  const w = 110, X = (u) => (Math.max(0, Math.min(1.25, u)) / 1.25) * w;
  const NS = 'http://www.w3.org/2000/svg';
  const el = (tag, attrs) => {
    const e = document.createElementNS(NS, tag);
    for (const [k, v] of Object.entries(attrs)) e.setAttribute(k, v);
    return e;
  };
  const svg = el('svg', {viewBox: `0 0 ${w} 14`, width: w, height: 14, 'aria-hidden': 'true', class: 'ratio'});
  svg.append(el('rect', {x: 0, y: 5, width: w, height: 4, class: 'ratio-track'}));
  svg.append(el('rect', {x: X(fr.ci95[0]).toFixed(1), y: 2, width: Math.max(1.5, X(fr.ci95[1]) - X(fr.ci95[0])).toFixed(1), height: 10, class: 'ratio-ci'}));
  svg.append(el('path', {d: `M${X(fr.value).toFixed(1)},0V14`, class: 'ratio-value'}));
  svg.append(el('path', {d: `M${X(1).toFixed(1)},0V14`, class: 'ratio-100'}));
  return h('span', {class: 'ratio-cell'}, svg, ' ', h('span', null, num(fr.value, 2)), ' ',
      h('span', {class: 'interval'}, `(${num(fr.ci95[0], 2)} to ${num(fr.ci95[1], 2)})`));
}

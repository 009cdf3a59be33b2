// Portfolio of one structure: a row per member with the latest force and
// its 95 % interval, utilisation against the design force, the 30-day
// trend, time since the last record and open alerts. Sortable by every
// column; members with open alerts stay on top unless the reader unticks it.
import {api} from './api.js';
import {h, kN, pct, ago, when, ms, num} from './format.js';
import {sparkline} from './charts.js';
import {pageHeader, section, noticeBox, fill} from './shared.js';

const COLUMNS = [
  {key: 'member', label: 'Member', value: (r) => r.external_id, text: true},
  {key: 'alerts', label: 'Open alerts', value: (r) => r.open_alerts},
  {key: 'force', label: 'Latest force (95 % interval)', value: (r) => (r.latest ? r.latest.axial_force_n : null)},
  {key: 'utilisation', label: 'Utilisation of design force', value: (r) => r.utilisation},
  {key: 'trend', label: 'Change over 30 days', value: (r) => r.trendChange},
  {key: 'last', label: 'Last record', value: (r) => (r.last_record_at ? ms(r.last_record_at) : null)},
];

export async function render(main, [structureId], ctx) {
  const data = await api.get(`/v1/structures/${structureId}/portfolio`);
  // 30-day histories for the inline trends, all at once.
  const histories = await Promise.all(data.members.map((m) => api.get(`/v1/members/${m.member_id}/force/history`)));
  ctx.fetched();
  if (ctx.stale()) return;
  const rows = data.members.map((m, i) => {
    const pts = histories[i].points.map((p) => ({x: ms(p.measured_at), y: p.axial_force_n}));
    return {...m, trend: pts, trendChange: pts.length >= 2 ? pts[pts.length - 1].y - pts[0].y : null};
  });
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
      section('Portfolio',
          h('p', {class: 'controls'}, toggle, h('label', {for: 'alerts-first'}, ' Members with open alerts first')),
          h('div', {class: 'table-scroll'}, table), live,
          h('p', {class: 'help'}, 'Utilisation is the latest force divided by the design force of the member description. ',
              'The trend shows every estimate of the last 30 days; its square marks the latest.')),
      noticeBox('Estimates support inspection planning; they do not replace assessment by a licensed structural engineer under the local codes.'));
}

function row(r) {
  const latest = r.latest;
  const alerts = r.open_alerts > 0
    ? h('a', {class: 'flag flag-alert', href: `#/alerts?member_id=${r.member_id}`},
        h('span', {'aria-hidden': 'true'}, '▲ '), `${r.open_alerts} open`)
    : h('span', {class: 'muted'}, 'none');
  const force = latest
    ? [h('strong', null, kN(latest.axial_force_n)), h('br'),
      h('span', {class: 'interval'}, `${num(latest.ci95_n[0] / 1000, 1)} to ${num(latest.ci95_n[1] / 1000, 1)} kN`),
      latest.cautions && latest.cautions.length
        ? h('span', {class: 'caution-count', title: latest.cautions.map((c) => c.code).join(', ')},
            ` · △ ${latest.cautions.length} ${latest.cautions.length === 1 ? 'caution' : 'cautions'}`)
        : null]
    : h('span', {class: 'muted'}, 'no estimate yet');
  const util = r.utilisation === null ? h('span', {class: 'muted'}, r.design_axial_force_n ? '–' : 'no design force') : utilBar(r.utilisation);
  const trendLabel = r.trend.length
    ? `30-day trend of ${r.external_id}: ${r.trend.length} estimates, from ${kN(r.trend[0].y)} to ${kN(r.trend[r.trend.length - 1].y)}`
    : `30-day trend of ${r.external_id}: no estimates`;
  const tr = h('tr', {class: r.open_alerts > 0 ? 'has-alert' : null, dataset: {member: r.member_id}},
      h('th', {scope: 'row'}, h('a', {href: `#/members/${r.member_id}`}, r.external_id)),
      h('td', null, alerts),
      h('td', {class: 'num'}, force),
      h('td', null, util),
      h('td', null, sparkline(r.trend, {label: trendLabel}),
          r.trendChange !== null ? h('span', {class: 'trend-change'}, ` ${r.trendChange >= 0 ? '+' : '−'}${kN(Math.abs(r.trendChange))}`) : null),
      h('td', null, r.last_record_at ? h('time', {datetime: r.last_record_at, title: when(r.last_record_at)}, ago(r.last_record_at)) : h('span', {class: 'muted'}, 'never')));
  return tr;
}

// Utilisation as a bar with the 100 % mark: the number is printed beside
// it, so the bar is never the only carrier of the value.
function utilBar(u) {
  const w = 90, x = Math.max(0, Math.min(1.25, u)) / 1.25 * w;
  const svg = document.createElementNS('http://www.w3.org/2000/svg', 'svg');
  svg.setAttribute('viewBox', `0 0 ${w} 12`);
  svg.setAttribute('width', w);
  svg.setAttribute('height', 12);
  svg.setAttribute('aria-hidden', 'true');
  svg.setAttribute('class', 'util' + (u > 1 ? ' over' : ''));
  const track = document.createElementNS('http://www.w3.org/2000/svg', 'rect');
  track.setAttribute('x', 0);
  track.setAttribute('y', 2);
  track.setAttribute('width', w);
  track.setAttribute('height', 8);
  track.setAttribute('class', 'util-track');
  const bar = document.createElementNS('http://www.w3.org/2000/svg', 'rect');
  bar.setAttribute('x', 0);
  bar.setAttribute('y', 2);
  bar.setAttribute('width', x.toFixed(1));
  bar.setAttribute('height', 8);
  bar.setAttribute('class', 'util-bar');
  const mark = document.createElementNS('http://www.w3.org/2000/svg', 'path');
  mark.setAttribute('d', `M${(w / 1.25).toFixed(1)},0V12`);
  mark.setAttribute('class', 'util-100');
  svg.append(track, bar, mark);
  return h('span', {class: 'util-cell'}, svg, ' ', h('span', null, pct(u)), u > 1 ? h('span', {class: 'flag'}, ' over design') : null);
}

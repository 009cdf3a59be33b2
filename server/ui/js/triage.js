// Triage across structures: every member of every structure of the
// organisation, worst first (open alerts of tier "alert", then "watch",
// then the top of the force-ratio interval, lowest first: for a tie a low
// ratio is the danger). Filterable by structure, by alert state and by
// member name; the order is the service's (GET /v1/triage).
import {api, qs} from './api.js';
import {h, when, ago} from './format.js';
import {pageHeader, section, noticeBox, fill, csvButton} from './shared.js';
import {alertsCell, forceCell, ratioCell, changeCell, RATIO_HELP} from './portfolio.js';

const SHOW = [['all', 'Every member'], ['open', 'With open alerts'], ['alert', 'With an alert (confident)'],
  ['watch', 'With a watch'], ['none', 'Without open alerts']];

export async function render(main, args, ctx) {
  const data = await api.get('/v1/triage');
  ctx.fetched();
  if (ctx.stale()) return;
  ctx.setTitle('Triage');
  const params = ctx.params;
  const state = {structure: params.get('structure') || '', show: SHOW.some((x) => x[0] === params.get('show')) ? params.get('show') : 'all',
    text: params.get('q') || ''};
  const structure = h('select', {id: 'triage-structure'}, h('option', {value: ''}, 'Every structure'),
      data.structures.map((st) => h('option', {value: String(st.id), selected: String(st.id) === state.structure}, st.name)));
  const show = h('select', {id: 'triage-show'}, SHOW.map(([v, t]) => h('option', {value: v, selected: v === state.show}, t)));
  const text = h('input', {id: 'triage-text', type: 'search', value: state.text, placeholder: 'member id contains…'});
  const count = h('p', {class: 'sub', id: 'triage-count', 'aria-live': 'polite'});
  const table = h('table', {class: 'portfolio', id: 'triage'});
  const csvSlot = h('span');

  const keep = (r) => {
    const t = r.open_alerts_by_tier;
    if (state.structure && String(r.structure_id) !== state.structure) return false;
    if (state.show === 'open' && !r.open_alerts) return false;
    if (state.show === 'alert' && !t.alert) return false;
    if (state.show === 'watch' && !t.watch) return false;
    if (state.show === 'none' && r.open_alerts) return false;
    return !state.text || r.external_id.toLowerCase().includes(state.text.toLowerCase());
  };
  function draw() {
    const rows = data.members.filter(keep);
    count.textContent = `${rows.length} of ${data.members.length} members, worst first`;
    table.replaceChildren(h('caption', null, 'Members of every structure, worst first'),
        h('thead', null, h('tr', null, ['#', 'Structure', 'Member', 'Open alerts', 'Latest force (95 % interval)',
          'Force ratio N / N design (95 %)', 'Change over 30 days (95 %)', 'Last record'].map((t) => h('th', {scope: 'col'}, t)))),
        h('tbody', null, rows.map((r, i) => {
          const t = r.open_alerts_by_tier;
          return h('tr', {class: t.alert ? 'has-alert' : t.watch ? 'has-watch' : null, dataset: {member: r.member_id}},
              h('td', {class: 'num'}, String(i + 1)),
              h('td', null, h('a', {href: `#/structures/${r.structure_id}`}, r.structure_name)),
              h('th', {scope: 'row'}, h('a', {href: `#/members/${r.member_id}`}, r.external_id)),
              h('td', null, alertsCell(r)), h('td', {class: 'num'}, forceCell(r.latest)), h('td', null, ratioCell(r)),
              h('td', null, changeCell(r)),
              h('td', null, r.last_record_at ? h('time', {datetime: r.last_record_at, title: when(r.last_record_at)}, ago(r.last_record_at))
                : h('span', {class: 'muted'}, 'never')));
        })));
    csvSlot.replaceChildren(csvButton('/v1/triage' + qs({structure_id: state.structure || null}), 'triage.csv'));
    history.replaceState(null, '', '#/triage' + qs({structure: state.structure || null, show: state.show === 'all' ? null : state.show,
      q: state.text || null}));
  }
  structure.addEventListener('change', () => { state.structure = structure.value; draw(); });
  show.addEventListener('change', () => { state.show = show.value; draw(); });
  text.addEventListener('input', () => { state.text = text.value.trim(); draw(); });
  draw();
  fill(main,
      pageHeader('Triage', [{label: 'Structures', href: '#/'}, {label: 'Triage'}],
          `${ctx.me.organisation.name}: every member of every structure, the most urgent first`),
      section('Members, worst first',
          h('p', {class: 'controls'}, h('label', {for: 'triage-structure'}, 'Structure '), structure, ' ',
              h('label', {for: 'triage-show'}, 'Show '), show, ' ', h('label', {for: 'triage-text'}, 'Member '), text, ' ', csvSlot),
          count, h('div', {class: 'table-scroll'}, table),
          h('p', {class: 'help'}, 'Order: open alerts of tier alert (beyond a limit with 95 % confidence, or a drift rule), then ',
              'of tier watch (the interval straddles a limit), then the top of the force-ratio interval, lowest first. ', RATIO_HELP)),
      noticeBox('Neither an alert nor its absence says that a member is safe. Estimates support inspection planning; ' +
        'they do not replace assessment by a licensed structural engineer under the local codes.'));
}

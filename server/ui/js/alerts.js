// Alerts: open and past, with their evidence (the estimates involved with
// residuals and the baseline), and acknowledge / resolve for the upload and
// admin roles (the buttons are not offered to a read token; the API refuses
// it anyway).
import {api, qs, roleAtLeast} from './api.js';
import {h, when, kN, kNm2, num, zoneLabel} from './format.js';
import {pageHeader, errorBox, noticeBox, fill, csvButton} from './shared.js';

const TIER_TEXT = {
  alert: 'Beyond the limit with 95 % confidence (the whole interval), or a drift rule',
  watch: 'The 95 % interval straddles the limit: possibly beyond it; a repeat record narrows the interval',
};

const STATES = [['open', 'Open'], ['acknowledged', 'Acknowledged'], ['resolved', 'Resolved'], ['all', 'All']];

export async function render(main, args, ctx) {
  const state = STATES.some((x) => x[0] === ctx.params.get('state')) ? ctx.params.get('state') : 'open';
  const memberId = ctx.params.get('member_id');
  const data = await api.get('/v1/alerts' + qs({state: state === 'all' ? null : state, member_id: memberId}));
  // Member names for the list (one request per structure).
  const names = new Map();
  const structures = await api.get('/v1/structures');
  const lists = await Promise.all(structures.structures.map((st) => api.get(`/v1/structures/${st.id}/members`)));
  for (const l of lists) for (const m of l.members) names.set(m.id, m.external_id);
  ctx.fetched();
  if (ctx.stale()) return;
  ctx.setTitle('Alerts');
  const canAct = roleAtLeast(ctx.me.role, 'upload');
  const filter = (key) => '#/alerts' + qs({state: key, member_id: memberId});
  const tabs = h('nav', {class: 'range', 'aria-label': 'Alert state'}, h('span', {class: 'range-label'}, 'Show: '),
      STATES.map(([key, label]) => h('a', {href: filter(key), class: 'chip', 'aria-current': key === state ? 'true' : null}, label)));
  const list = data.alerts.slice().sort((a, b) => Date.parse(b.raised_at) - Date.parse(a.raised_at));
  const scope = memberId ? ` for ${names.get(Number(memberId)) || 'member ' + memberId}` : '';
  fill(main,
      pageHeader('Alerts', [{label: 'Structures', href: '#/'}, {label: 'Alerts'}],
          `${list.length} ${state === 'all' ? '' : state + ' '}${list.length === 1 ? 'alert' : 'alerts'}${scope}` +
          (canAct ? '' : ' · your role may read alerts; acknowledging needs an upload or admin token')),
      tabs, memberId ? h('p', null, h('a', {href: '#/alerts' + qs({state})}, 'Show every member')) : null,
      h('p', null, csvButton('/v1/alerts' + qs({state: state === 'all' ? null : state, member_id: memberId}), 'alerts.csv')),
      list.length ? h('ol', {class: 'alerts', id: 'alerts'}, list.map((a) => alertCard(a, names, canAct, ctx)))
        : h('p', {class: 'muted', id: 'alerts'}, 'No alerts here.'),
      noticeBox('An alert says what to inspect; neither an alert nor its absence says that a member is safe. ' +
        'Estimates support inspection planning; they do not replace assessment by a licensed structural engineer under the local codes.'));
}

function alertCard(a, names, canAct, ctx) {
  const status = h('div', {'aria-live': 'polite'});
  const act = async (what) => {
    status.replaceChildren();
    try {
      await api.post(`/v1/alerts/${a.id}/${what}`, '', 'application/json');
      ctx.reload();  // the alert moves to its new state
    } catch (err) {
      status.append(errorBox(err, `Could not ${what} the alert`));
    }
  };
  const actions = [];
  if (canAct && a.state === 'open') actions.push(h('button', {type: 'button', class: 'primary', onclick: () => act('acknowledge')}, 'Acknowledge'));
  if (canAct && a.state !== 'resolved') actions.push(h('button', {type: 'button', onclick: () => act('resolve')}, 'Resolve'));
  const member = names.get(a.member_id) || `member ${a.member_id}`;
  return h('li', {class: `alert-card state-${a.state}`, dataset: {alert: a.id}},
      h('header', null,
          h('span', {class: 'state-tag'}, {open: '▲ open', acknowledged: '◆ acknowledged', resolved: '✓ resolved'}[a.state] || a.state), ' ',
          h('span', {class: `tier tier-${a.tier || 'alert'}`, title: TIER_TEXT[a.tier || 'alert']},
              a.tier === 'watch' ? '△ watch: possibly beyond' : '▲ alert'), ' ',
          h('strong', {class: 'rule'}, a.rule), ' · ', h('a', {href: `#/members/${a.member_id}`}, member),
          a.estimate_id ? [' · ', h('a', {href: `#/estimates/${a.estimate_id}`}, `estimate ${a.estimate_id}`)] : null),
      h('p', {class: 'message'}, a.message),
      h('p', {class: 'muted'}, `Raised ${when(a.raised_at)}`, a.acknowledged_at ? `; acknowledged ${when(a.acknowledged_at)}` : '',
          a.resolved_at ? `; resolved ${when(a.resolved_at)}` : ''),
      evidence(a.evidence),
      actions.length ? h('p', {class: 'actions'}, actions) : null, status);
}

function evidence(ev) {
  if (!ev || typeof ev !== 'object') return null;
  const isEi = ev.quantity === 'bending_stiffness_nm2';
  const f = (v) => (v === undefined || v === null ? '–' : isEi ? kNm2(v, 3) : kN(v, 2));
  const parts = [];
  if (ev.baseline) {
    const b = ev.baseline;
    parts.push(h('p', null, `Baseline: ${b.points} estimates, ${f(b.intercept)} at ${num(b.mean_temperature_c, 1)} °C` +
      (b.temperature_slope ? `, slope ${isEi ? num(b.slope_per_c / 1000, 4) + ' kN·m²' : num(b.slope_per_c / 1000, 3) + ' kN'} per K` : '') +
      `, residual scatter ${f(b.residual_std)}.`));
  }
  if (Array.isArray(ev.points) && ev.points.length) {
    parts.push(h('table', {class: 'compact'}, h('caption', null, 'Evidence'),
        h('thead', null, h('tr', null, [`Measured (${zoneLabel()})`, 'Value', 'Expected', 'Residual', 'z', 'CUSUM'].map((t) => h('th', {scope: 'col'}, t)))),
        h('tbody', null, ev.points.map((p) => h('tr', null,
            h('td', null, h('a', {href: `#/estimates/${p.estimate_id}`}, when(p.measured_at))),
            h('td', {class: 'num'}, f(p.value)), h('td', {class: 'num'}, f(p.predicted)), h('td', {class: 'num'}, f(p.residual)),
            h('td', {class: 'num'}, num(p.z, 2)), h('td', {class: 'num'}, num(p.cusum, 2)))))));
  }
  if (!parts.length) return null;
  return h('details', {class: 'evidence'}, h('summary', null, 'Evidence'), parts);
}

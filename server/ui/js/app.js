// The dashboard's entry: hash routes, the navigation, sign-in and the list
// of structures. Pages live in their own modules; each exports
// render(main, params, ctx) and returns when its data is drawn.
import {api, token, setToken, forgetMe, roleAtLeast, ApiError} from './api.js';
import {h, displayZone, setDisplayZone, zoneChoices} from './format.js';
import {pageHeader, errorBox, loading, pageStart, pageFetched, pageReady, pageFailed} from './shared.js';
import * as portfolio from './portfolio.js';
import * as member from './member.js';
import * as estimate from './estimate.js';
import * as alerts from './alerts.js';
import * as upload from './upload.js';
import * as triage from './triage.js';
import * as report from './report.js';

const routes = [
  [/^\/$/, 'structures', structuresPage],
  [/^\/structures\/(\d+)$/, 'portfolio', portfolio.render],
  [/^\/members\/(\d+)$/, 'member', member.render],
  [/^\/estimates\/(\d+)$/, 'estimate', estimate.render],
  [/^\/structures\/(\d+)\/report$/, 'report', report.render],
  [/^\/triage$/, 'triage', triage.render],
  [/^\/alerts$/, 'alerts', alerts.render],
  [/^\/upload$/, 'upload', upload.render],
  [/^\/signin$/, 'signin', signinPage],
];

let generation = 0;

async function route() {
  const gen = ++generation;
  const hash = location.hash.replace(/^#/, '') || '/';
  const [path, query] = hash.split('?');
  const params = new URLSearchParams(query || '');
  const main = document.getElementById('main');
  let match = null;
  for (const [re, name, fn] of routes) {
    const m = path.match(re);
    if (m) {
      match = {name, fn, args: m.slice(1)};
      break;
    }
  }
  if (!token() && (!match || match.name !== 'signin')) {
    location.replace('#/signin' + (hash !== '/' && !hash.startsWith('/signin') ? '?next=' + encodeURIComponent(hash) : ''));
    return;
  }
  if (!match) {
    pageStart('not-found');
    main.replaceChildren(pageHeader('Not found'), h('p', null, 'No page at ', h('code', null, hash), '. ', h('a', {href: '#/'}, 'Structures')));
    pageReady();
    return;
  }
  pageStart(match.name);
  main.replaceChildren(loading());
  const ctx = {
    params,
    stale: () => gen !== generation,
    fetched: pageFetched,
    reload: route,
    setTitle: (t) => (document.title = t + ' · taut'),
  };
  try {
    if (match.name !== 'signin') {
      ctx.me = await api.me();
      renderWho(ctx.me);
    }
    await match.fn(main, match.args, ctx);
    if (ctx.stale()) return;
    pageReady();
  } catch (err) {
    if (ctx.stale()) return;
    if (err instanceof ApiError && err.status === 401) {
      location.replace('#/signin?expired=1&next=' + encodeURIComponent(hash));
      return;
    }
    main.replaceChildren(pageHeader('Could not show this page'), errorBox(err));
    pageFailed();
  }
  // Move focus to the new content for keyboard and screen-reader users,
  // unless the page put it somewhere on purpose (a form field).
  if (!main.contains(document.activeElement)) main.focus({preventScroll: true});
}

function renderWho(me) {
  const who = document.getElementById('who');
  const out = h('button', {type: 'button', class: 'link-button', onclick: signOut}, 'Sign out');
  // Display time zone, chosen per user and kept in this browser.
  const zone = displayZone();
  const tz = h('select', {id: 'tz', 'aria-label': 'Display time zone', title: 'Times are stored in UTC; shown in this zone'},
      zoneChoices().map((z) => h('option', {value: z, selected: z === zone}, z)));
  tz.addEventListener('change', () => {
    setDisplayZone(tz.value);
    route();
  });
  who.replaceChildren(h('span', null, me.organisation.name, ' · ', h('span', {class: 'role'}, me.role)), ' ',
      h('label', {class: 'tz'}, h('span', {class: 'visually-hidden'}, 'Time zone '), tz), ' ', out);
  for (const li of document.querySelectorAll('#nav [data-role]')) li.hidden = !roleAtLeast(me.role, li.dataset.role);
}

function signOut() {
  setToken('');
  forgetMe();
  document.getElementById('who').replaceChildren();
  location.hash = '#/signin';
}

// ---- sign-in

async function signinPage(main, args, ctx) {
  ctx.setTitle('Sign in');
  document.getElementById('who').replaceChildren();
  const input = h('input', {id: 'token', name: 'token', type: 'password', autocomplete: 'off', spellcheck: 'false',
    required: true, 'aria-describedby': 'token-help', placeholder: 'taut_…'});
  const status = h('div', {id: 'signin-status', 'aria-live': 'assertive'});
  if (ctx.params.get('expired')) status.append(errorBox({message: 'The token was refused (expired, revoked or unknown). Sign in again.'}, 'Signed out'));
  const form = h('form', {class: 'signin', novalidate: true},
      h('label', {for: 'token'}, 'API token'), input,
      h('p', {id: 'token-help', class: 'help'},
          'A token from ', h('code', null, 'taut token create --db PATH --org NAME --role read|upload|admin'),
          '. It is kept in this browser tab only and forgotten when the tab closes.'),
      h('button', {type: 'submit', class: 'primary'}, 'Sign in'), status);
  form.addEventListener('submit', async (ev) => {
    ev.preventDefault();
    const value = input.value.trim();
    status.replaceChildren();
    if (!/^taut_[0-9a-f]+_[0-9a-f]+$/.test(value)) {
      status.append(errorBox({message: 'A token looks like taut_<id>_<secret> (hexadecimal).'}, 'Not a token'));
      input.focus();
      return;
    }
    setToken(value);
    forgetMe();
    try {
      await api.me();
      const next = ctx.params.get('next');
      location.hash = next && next.startsWith('/') && !next.startsWith('/signin') ? '#' + next : '#/';
    } catch (err) {
      setToken('');
      status.append(errorBox(err, 'Sign-in failed'));
      input.focus();
    }
  });
  main.replaceChildren(pageHeader('Sign in'), form);
  input.focus();
}

// ---- structures

async function structuresPage(main, args, ctx) {
  ctx.setTitle('Structures');
  const data = await api.get('/v1/structures');
  ctx.fetched();
  if (ctx.stale()) return;
  const list = data.structures;
  const content = list.length
    ? h('ul', {class: 'cards', id: 'structures'}, list.map((st) => h('li', {class: 'card'},
        h('h2', null, h('a', {href: `#/structures/${st.id}`}, st.name)),
        st.description ? h('p', null, st.description) : null,
        h('p', {class: 'muted'}, 'Portfolio of members, latest forces and open alerts'))))
    : h('p', null, 'This organisation has no structures yet. An admin token creates them through ',
        h('code', null, 'POST /v1/structures'), ' (docs/API.md).');
  main.replaceChildren(pageHeader('Structures', [], `${ctx.me.organisation.name}: ${list.length} ${list.length === 1 ? 'structure' : 'structures'}`), content);
}

window.addEventListener('hashchange', route);
if (document.readyState === 'loading') window.addEventListener('DOMContentLoaded', route);
else route();

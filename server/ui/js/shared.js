// Pieces every page uses: headings and breadcrumbs, error and notice boxes,
// cautions, and the page-state signal the browser test and the bench read
// (<html data-page=... data-state=loading|ready|error>, window.tautTiming).
import {h} from './format.js';
import {api} from './api.js';

// replaceChildren without the pitfall: null and false children are left
// out (the DOM would insert the text "null").
export function fill(el, ...children) {
  el.replaceChildren(...children.flat().filter((c) => c !== null && c !== undefined && c !== false));
}

export function pageHeader(title, crumbs = [], sub = null) {
  const nav = crumbs.length
    ? h('nav', {class: 'crumbs', 'aria-label': 'Breadcrumb'},
        h('ol', null, crumbs.map((c) => h('li', null, c.href ? h('a', {href: c.href}, c.label) : c.label))))
    : null;
  return h('header', {class: 'page-head'}, nav, h('h1', null, title), sub ? h('p', {class: 'sub'}, sub) : null);
}

export function errorBox(err, what) {
  const msg = err && err.message ? err.message : String(err);
  return h('div', {class: 'box box-error', role: 'alert'},
      h('p', {class: 'box-title'}, h('span', {class: 'glyph', 'aria-hidden': 'true'}, '✕ '), what || 'Something went wrong'),
      h('p', null, msg), err && err.code ? h('p', {class: 'code'}, 'code: ', h('code', null, err.code)) : null);
}

// The standing notice every result carries (estimation/cautions.h).
export function noticeBox(text) {
  return h('aside', {class: 'box box-notice', 'aria-label': 'Standing notice'},
      h('p', {class: 'box-title'}, h('span', {class: 'glyph', 'aria-hidden': 'true'}, '§ '), 'Notice'), h('p', null, text));
}

export function cautionList(cautions, empty = 'No cautions.') {
  if (!cautions || cautions.length === 0) return h('p', {class: 'muted'}, empty);
  return h('ul', {class: 'cautions'},
      cautions.map((c) => h('li', null, h('span', {class: 'glyph', 'aria-hidden': 'true'}, '△ '),
          h('code', {class: 'caution-code'}, c.code),
          c.severity ? h('span', {class: `severity severity-${c.severity}`}, ` ${c.severity}`) : null,
          ' ', c.message)));
}

// The one-line verdict for the technician on site (docs/FORMATS.md 3.4);
// a result stored before verdicts existed reads as usable.
export function verdictLine(result) {
  const v = (result && result.verdict) || {code: 'usable', summary: 'Usable.'};
  return h('p', {class: `verdict-line verdict-${v.code}`, id: 'verdict'}, v.summary);
}

export function loading(text = 'Loading…') {
  return h('p', {class: 'loading', role: 'status'}, text);
}

export function section(title, ...children) {
  const id = 'sec-' + title.toLowerCase().replace(/[^a-z0-9]+/g, '-');
  return h('section', {class: 'panel', 'aria-labelledby': id}, h('h2', {id}, title), ...children);
}

export function dl(pairs) {
  return h('dl', {class: 'facts'}, pairs.filter(Boolean).map(([k, v]) => [h('dt', null, k), h('dd', null, v)]));
}

// ---- page state

let started = 0;
export function pageStart(name) {
  started = performance.now();
  const root = document.documentElement;
  root.dataset.page = name;
  root.dataset.state = 'loading';
  window.tautTiming = {page: name, fetched_ms: null, drawn_ms: null};
}

export function pageFetched() {
  if (window.tautTiming) window.tautTiming.fetched_ms = performance.now() - started;
}

// Marks the page drawn after the browser has painted it (two animation
// frames: the first runs before the paint of the new DOM, the second after).
export function pageReady() {
  const page = document.documentElement.dataset.page;
  requestAnimationFrame(() => requestAnimationFrame(() => {
    if (document.documentElement.dataset.page !== page) return;
    if (window.tautTiming) {
      window.tautTiming.drawn_ms = performance.now() - started;
      // From the start of the document's navigation (a full load: modules,
      // /v1/me, data, drawing).
      window.tautTiming.since_navigation_ms = performance.now();
    }
    document.documentElement.dataset.state = 'ready';
  }));
}

export function pageFailed() {
  document.documentElement.dataset.state = 'error';
}

// ---- downloads (CSV exports, the inspection report)

// A button that fetches `path` (a string, or a function giving it at click
// time) with the token and saves the answer as `filename`. The last
// download is kept in window.tautLastDownload ({name, type, bytes, head, lines})
// for the browser test.
export function downloadButton(path, filename, label, id = null) {
  const status = h('span', {class: 'csv-status', 'aria-live': 'polite'});
  const button = h('button', {type: 'button', class: 'csv', id,
    onclick: async () => {
      status.textContent = ' …';
      try {
        const res = await api.raw(typeof path === 'function' ? path() : path);
        const blob = await res.blob();
        const text = blob.type.startsWith('application/pdf') ? '' : await blob.text();
        window.tautLastDownload = {name: filename, type: blob.type, bytes: blob.size, head: text.slice(0, 400),
          lines: text.split('\r\n').length - 1};
        const a = h('a', {href: URL.createObjectURL(blob), download: filename, hidden: true});
        document.body.append(a);
        a.click();
        setTimeout(() => {
          URL.revokeObjectURL(a.href);
          a.remove();
        }, 1000);
        status.textContent = ` ${filename} (${blob.size} bytes)`;
      } catch (err) {
        status.textContent = ' ' + (err.message || String(err));
      }
    }}, h('span', {'aria-hidden': 'true'}, '⤓ '), label);
  return h('span', {class: 'csv-download'}, button, status);
}

// The CSV form of an API route (?format=csv) beside a data table.
export function csvButton(path, filename, label = 'Download CSV') {
  return downloadButton(path + (path.includes('?') ? '&' : '?') + 'format=csv', filename, label);
}

// The inspection report of a structure: a print-ready HTML document and its
// PDF, made by the service (GET /v1/structures/{id}/report, docs/API.md
// "Inspection report"); the same as `taut report`. The period defaults to
// the last 90 days; the author's name goes on the cover and the signature
// block.
import {api, qs} from './api.js';
import {h} from './format.js';
import {pageHeader, section, noticeBox, fill, downloadButton} from './shared.js';

const DAY = 86400e3;

export async function render(main, [structureId], ctx) {
  const st = await api.get(`/v1/structures/${structureId}`);
  ctx.fetched();
  if (ctx.stale()) return;
  ctx.setTitle(`Inspection report · ${st.name}`);
  const iso = (t) => new Date(t).toISOString().slice(0, 10);
  const from = h('input', {id: 'report-from', type: 'date', value: iso(Date.now() - 90 * DAY), required: true});
  const to = h('input', {id: 'report-to', type: 'date', value: iso(Date.now() + DAY), required: true});
  const author = h('input', {id: 'report-author', type: 'text', maxlength: 200, autocomplete: 'name',
    placeholder: 'name of the responsible engineer'});
  const path = (format) => () => `/v1/structures/${structureId}/report` +
    qs({from: from.value + 'T00:00:00Z', to: to.value + 'T00:00:00Z', author: author.value.trim() || null, format});
  const slug = st.name.toLowerCase().replace(/[^a-z0-9]+/g, '-').replace(/^-|-$/g, '') || 'structure';
  fill(main,
      pageHeader('Inspection report', [{label: 'Structures', href: '#/'}, {label: st.name, href: `#/structures/${structureId}`},
        {label: 'Inspection report'}], st.name),
      section('Period and author',
          h('form', {class: 'report-form', novalidate: true, onsubmit: (ev) => ev.preventDefault()},
              h('p', null, h('label', {for: 'report-from'}, 'From (UTC date)'), h('br'), from),
              h('p', null, h('label', {for: 'report-to'}, 'To (UTC date, exclusive)'), h('br'), to),
              h('p', null, h('label', {for: 'report-author'}, 'Author'), h('br'), author)),
          h('p', {class: 'actions'},
              downloadButton(path('pdf'), `inspection-report-${slug}.pdf`, 'Report as PDF', 'report-pdf'), ' ',
              downloadButton(path(null), `inspection-report-${slug}.html`, 'Report as HTML (print-ready)', 'report-html')),
          h('p', {class: 'help'}, 'The report has a cover, the portfolio table, one sheet per member (force history with ',
              'its interval band, bending stiffness and end fixity, the latest estimate\'s spectrum and frequencies, ',
              'cautions, alerts and their handling, logbook entries), the method with its references and a signature block. ',
              'The same document comes from ', h('code', null, 'taut report --structure ' + structureId + ' --out DIR'), '.')),
      noticeBox('Estimates support inspection planning; they do not replace assessment by a licensed structural engineer under the local codes.'));
}

// Upload page for a technician on site: pick the member, drop (or choose)
// the record CSV (docs/FORMATS.md section 2), watch the job, and land on the
// estimate. The reader's errors (line and column) are shown in place so the
// file can be fixed and sent again.
import {api, qs, roleAtLeast} from './api.js';
import {h, num} from './format.js';
import {pageHeader, errorBox, cautionList, fill} from './shared.js';

const POLL_MS = 250;

export async function render(main, args, ctx) {
  ctx.setTitle('Upload a record');
  if (!roleAtLeast(ctx.me.role, 'upload')) {
    fill(main, pageHeader('Upload a record'), h('p', null, `Uploading needs an upload or admin token; this one has the ${ctx.me.role} role.`));
    return;
  }
  const structures = (await api.get('/v1/structures')).structures;
  const lists = await Promise.all(structures.map((st) => api.get(`/v1/structures/${st.id}/members`)));
  ctx.fetched();
  if (ctx.stale()) return;
  const wanted = ctx.params.get('member_id');
  const select = h('select', {id: 'member', name: 'member', required: true},
      h('option', {value: ''}, 'Choose a member…'),
      structures.map((st, i) => h('optgroup', {label: st.name}, lists[i].members.map((m) =>
        h('option', {value: m.id, selected: String(m.id) === wanted}, `${m.external_id}`)))));
  const file = h('input', {id: 'file', name: 'file', type: 'file', accept: '.csv,text/csv,text/plain'});
  const chosen = h('p', {class: 'chosen', id: 'chosen', 'aria-live': 'polite'}, 'No file chosen.');
  let picked = null;
  const pick = (f) => {
    picked = f || null;
    chosen.textContent = picked ? `${picked.name} (${num(picked.size / 1024, 1)} KiB)` : 'No file chosen.';
  };
  file.addEventListener('change', () => pick(file.files[0]));
  const drop = h('div', {class: 'drop', id: 'drop'},
      h('p', null, 'Drop the record CSV here, or'), h('label', {for: 'file', class: 'file-label'}, 'choose a file'), file, chosen);
  drop.addEventListener('dragover', (ev) => {
    ev.preventDefault();
    drop.classList.add('over');
  });
  drop.addEventListener('dragleave', () => drop.classList.remove('over'));
  drop.addEventListener('drop', (ev) => {
    ev.preventDefault();
    drop.classList.remove('over');
    if (ev.dataTransfer.files.length) pick(ev.dataTransfer.files[0]);
  });
  const recordedAt = h('input', {id: 'recorded_at', name: 'recorded_at', type: 'text', inputmode: 'text', placeholder: '2026-11-20T10:00:00Z',
    'aria-describedby': 'recorded-help'});
  const submit = h('button', {type: 'submit', class: 'primary', id: 'send'}, 'Upload');
  const out = h('div', {id: 'upload-status', 'aria-live': 'polite'});
  const form = h('form', {class: 'upload', novalidate: true},
      h('p', null, h('label', {for: 'member'}, 'Member'), h('br'), select),
      drop,
      h('details', null, h('summary', null, 'Override the time of the record'),
          h('p', null, h('label', {for: 'recorded_at'}, 'Recorded at (UTC, ISO 8601)'), h('br'), recordedAt),
          h('p', {id: 'recorded-help', class: 'help'}, 'Only when the file has no “# recorded_at=” line or it is wrong.')),
      h('p', null, submit), out);

  form.addEventListener('submit', async (ev) => {
    ev.preventDefault();
    out.replaceChildren();
    if (!select.value) return fail(out, select, 'Choose the member the record belongs to.');
    if (!picked) return fail(out, file, 'Choose or drop a record CSV.');
    submit.disabled = true;
    try {
      const body = await picked.text();
      const q = qs({recorded_at: recordedAt.value.trim() || null});
      const res = await api.post(`/v1/members/${select.value}/records${q}`, body, 'text/csv');
      out.append(h('p', null, res.duplicate ? `This record was uploaded before (record ${res.record_id}); showing its job.` : `Record ${res.record_id} stored; job ${res.job_id} queued.`));
      if (res.record_cautions) out.append(h('h3', null, 'Record cautions'), cautionList(res.record_cautions));
      await follow(res.job_id, out, ctx);
    } catch (err) {
      out.append(errorBox(err, err.status === 400 || err.status === 422 ? 'The record was refused' : 'Upload failed'));
    } finally {
      submit.disabled = false;
    }
  });
  fill(main, pageHeader('Upload a record', [{label: 'Structures', href: '#/'}, {label: 'Upload'}],
      'Ambient or impact acceleration record, CSV with a time_s column and one column per sensor channel.'), form);
}

function fail(out, field, message) {
  out.append(errorBox({message}, 'Not ready to upload'));
  field.focus();
}

// Polls the job until it is done (then opens the estimate) or failed.
async function follow(jobId, out, ctx) {
  const bar = h('progress', {id: 'job-progress', max: 1, value: 0, 'aria-label': 'Identification progress'});
  const text = h('span', {id: 'job-state'}, 'queued');
  out.append(h('p', null, bar, ' ', text));
  for (;;) {
    const job = await api.get(`/v1/jobs/${jobId}`);
    bar.value = job.progress;
    text.textContent = `${job.state}, ${Math.round(job.progress * 100)} %`;
    if (job.state === 'done') {
      out.append(h('p', null, h('a', {href: `#/estimates/${job.estimate_id}`, id: 'estimate-link'}, `Open estimate ${job.estimate_id}`)));
      if (!ctx.stale()) location.hash = `#/estimates/${job.estimate_id}`;
      return;
    }
    if (job.state === 'failed') {
      out.append(errorBox({message: job.failure_reason}, 'The identification failed'));
      return;
    }
    if (ctx.stale()) return;
    await new Promise((r) => setTimeout(r, POLL_MS));
  }
}

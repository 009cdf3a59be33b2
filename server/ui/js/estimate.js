// Estimate page: the evidence behind one record's result. The first
// singular value spectrum (log scale) with the identified peaks marked,
// measured against model frequency per mode, the measured shapes at the
// sensors over the model shapes along the member, the cautions and the
// standing notice, and the record itself to download.
import {api} from './api.js';
import {h, kN, kNm2, num, sig, hz, when, degC} from './format.js';
import {plot} from './charts.js';
import {pageHeader, section, dl, cautionList, verdictLine, noticeBox, errorBox, fill, csvButton} from './shared.js';

// A failed secondary request shows its error in place; the rest of the page stays.
const soft = (p) => p.catch((err) => ({error: err}));

export async function render(main, [estimateId], ctx) {
  const [est, spectrum, shapes] = await Promise.all([
    api.get(`/v1/estimates/${estimateId}`),
    soft(api.get(`/v1/estimates/${estimateId}/spectrum`)),
    soft(api.get(`/v1/estimates/${estimateId}/model-shapes`)),
  ]);
  const [record, member] = await Promise.all([
    soft(api.get(`/v1/records/${est.record_id}`)),
    soft(api.get(`/v1/members/${est.member_id}/versions/${est.member_version}`)),
  ]);
  ctx.fetched();
  if (ctx.stale()) return;
  const r = est.result;
  const name = member.error ? `member ${est.member_id}` : member.external_id;
  ctx.setTitle(`Estimate ${est.id}`);
  fill(main,
      pageHeader(`Estimate ${est.id}: ${name}`, [{label: 'Structures', href: '#/'},
        member.error ? null : {label: 'Portfolio', href: `#/structures/${member.structure_id}`},
        {label: name, href: `#/members/${est.member_id}`}, {label: `Estimate ${est.id}`}].filter(Boolean),
      `Record measured ${when(est.measured_at)}${est.temperature_c !== null ? ', ' + degC(est.temperature_c) : ''}`),
      section('Result', verdictLine(r), resultFacts(r), h('h3', null, 'Cautions'), h('div', {id: 'cautions'}, cautionList(r.cautions)), noticeBox(r.notice)),
      section('Where the uncertainty of N comes from', budgetTable(r.uncertainty_budget)),
      section('Simplified formulas', simplifiedFacts(r.simplified_formulas, r.axial_force_n)),
      section('Spectrum', spectrum.error ? errorBox(spectrum.error, 'The spectrum could not be computed') : spectrumChart(spectrum)),
      section('Frequencies', h('div', {class: 'shapes'}, frequencyChart(r), differenceChart(r)), frequencyTable(r), csvButton(`/v1/estimates/${estimateId}`, `estimate-${estimateId}-modes.csv`)),
      section('Mode shapes', shapes.error ? errorBox(shapes.error, 'The model shapes could not be computed') : shapeCharts(shapes)),
      section('Record', record.error ? errorBox(record.error) : recordFacts(record)));
}

function quantity(q, fmt) {
  if (!q) return '–';
  if (q.fixed) return `${fmt(q.value)} (fixed by the member description)`;
  return `${fmt(q.value)} ± ${fmt(q.std)} (1 σ); 95 %: ${fmt(q.ci95[0])} to ${fmt(q.ci95[1])}`;
}

function resultFacts(r) {
  const fix = (v) => num(v, 2);
  return dl([
    ['Axial force N', h('strong', null, quantity(r.axial_force_n, (v) => kN(v, 2)))],
    ['Bending stiffness EI', quantity(r.bending_stiffness_nm2, (v) => kNm2(v, 3))],
    ['Fixity, left end', quantity(r.end_fixity && r.end_fixity.left, fix)],
    ['Fixity, right end', quantity(r.end_fixity && r.end_fixity.right, fix)],
    ['Plane', r.plane || '–'],
    ['Identifiability', r.identifiability || '–'],
    r.fit ? ['Fit', `${r.fit.converged ? 'converged' : 'not converged'}, reduced χ² ${num(r.fit.reduced_chi2, 2)}, ` +
      `${r.fit.starts} starts (${r.fit.starts_at_best} at the best), ${r.fit.iterations} iterations; interval for N: ${r.fit.axial_force_interval || '–'}`] : null,
    r.critical_compression_n ? ['Critical compression', kN(r.critical_compression_n)] : null,
  ]);
}

// ------------------------------------------- uncertainty budget (issue 17)

// The shares of var(N) by source (docs/FORMATS.md 3.6): which to improve,
// the record or the member's description (a tolerance marked "default" was
// not declared: measuring it narrows the interval).
function budgetTable(b) {
  if (!b) return h('p', {class: 'muted'}, 'This result was made before the uncertainty budget existed.');
  const rows = b.sources.map((x) => h('tr', null,
      h('th', {scope: 'row'}, x.label),
      h('td', {class: 'num'}, x.tolerance !== undefined ? `${sig(x.tolerance, 3)} ${x.tolerance_unit || ''}${x.default ? ' (default)' : ' (declared)'}` : '–'),
      h('td', {class: 'num'}, kN(x.std_n, 3)),
      h('td', {class: 'num'}, `${num(100 * x.share, 1)} %`)));
  return h('div', null,
      h('p', null, `Half-width of the 95 % interval of N over 1.96: ${kN(b.axial_force_std_n, 3)}, from the fit ${kN(b.fit_std_n, 3)} and the member's tolerances ` +
        `${kN(b.tolerance_std_n, 3)}, in quadrature (${b.method}).`),
      h('table', {class: 'compact', id: 'uncertainty-budget'}, h('caption', null, 'Shares of the variance of the axial force'),
          h('thead', null, h('tr', null, ['Source', 'Tolerance (1 σ)', 'σ of N', 'Share'].map((t) => h('th', {scope: 'col'}, t)))),
          h('tbody', null, rows)));
}

// The two spreadsheet formulas for the same modes, labelled as simplified,
// and why taut's value differs.
function simplifiedFacts(c, n) {
  if (!c) return h('p', {class: 'muted'}, 'No simplified formula applies to this result.');
  const value = (v) => (v === null || v === undefined ? 'not available' : kN(v, 2));
  return h('div', {id: 'simplified-formulas'},
      h('p', {class: 'help'}, `${c.label}. taut's estimate: ${n ? kN(n.value, 2) : '–'}.`),
      dl([
        ['Taut string from f₁', value(c.taut_string_force_n)],
        [`Pinned beam from ${c.modes_used} ${c.modes_used === 1 ? 'mode' : 'modes'}`, value(c.pinned_beam_force_n)],
      ]),
      c.reasons.length ? h('ul', {class: 'reasons'}, c.reasons.map((t) => h('li', null, t + '.')))
        : h('p', {class: 'muted'}, 'No effect the formulas leave out exceeds 1 % for this member.'));
}

// ----------------------------------------------------------- spectrum

function peakLabel(p) {
  return p.order ? String(p.order) : '?';
}

function spectrumChart(sp) {
  const data = sp.frequency_hz.map((f, i) => ({x: f, y: sp.s1[i]}));
  const paired = sp.peaks.filter((p) => p.paired), unpaired = sp.peaks.filter((p) => !p.paired);
  const desc = `First singular value of the ${sp.channels.length}-channel cross-spectral density, ${data.length} points ` +
    `(${sp.lines} Welch lines ${num(sp.line_spacing_hz, 3)} Hz apart, ${sp.segments} segments of ${sp.segment_samples} samples` +
    `${sp.lines_per_point > 1 ? `, largest of every ${sp.lines_per_point} lines shown` : ''}). ` +
    `${paired.length} identified ${paired.length === 1 ? 'mode' : 'modes'} marked` +
    (paired.length ? ': ' + paired.map((p) => `mode ${p.order} at ${hz(p.frequency_hz)}`).join(', ') : '') +
    (unpaired.length ? `; ${unpaired.length} unpaired (marked ?)` : '') + '.';
  const fig = plot({
    id: 'spectrum',
    title: 'First singular value spectrum',
    desc,
    height: 320,
    x: {type: 'linear', label: 'Frequency', unit: 'Hz', min: 0, max: 0.5 * sp.sample_rate_hz},
    y: {type: 'log', label: 'First singular value', unit: '(m/s²)²/Hz'},
    layers: [
      {kind: 'line', name: 's₁(f)', key: 's1', cls: 's-spectrum', data},
      {kind: 'peaks', name: 'Identified mode (its order)', key: 'peaks', cls: 's-peak', marker: 'diamond',
        data: paired.map((p) => ({x: p.frequency_hz, y: p.s1, label: peakLabel(p), peak: p}))},
      unpaired.length ? {kind: 'peaks', name: 'Identified, not paired with a model mode', key: 'unpaired', cls: 's-unpaired', marker: 'cross',
        data: unpaired.map((p) => ({x: p.frequency_hz, y: p.s1, label: '?', peak: p}))} : null,
    ],
    cursor: {
      layer: 's1',
      describe: (p) => `${hz(p.x, 2)}: ${sig(p.y, 3)} (m/s²)²/Hz`,
    },
    table: {rows: sp.peaks, columns: [
      {label: 'Mode', value: (p) => (p.order ? String(p.order) : 'unpaired')},
      {label: 'Frequency [Hz]', value: (p) => num(p.frequency_hz, 3)},
      {label: 's₁ at the peak [(m/s²)²/Hz]', value: (p) => sig(p.s1, 3)},
      {label: 'Damping ratio', value: (p) => num(p.damping_ratio, 4)},
    ]},
  });
  if (sp.note) fig.append(h('p', {class: 'help'}, sp.note));
  fig.append(h('p', {class: 'help'}, `Welch estimate (Hann window, 50 % overlap) of the whole record; the identification band runs to ${hz(sp.band_hz[1], 1)}.`));
  return fig;
}

// -------------------------------------------------------- frequencies

function frequencyChart(r) {
  const modes = r.modes || [];
  return plot({
    id: 'frequencies',
    title: 'Measured and model frequency per mode',
    desc: modes.length ? modes.map((m) => `mode ${m.order}: measured ${hz(m.frequency_hz)}, model ${hz(m.model_frequency_hz)}`).join('; ') + '.'
      : 'No mode was paired with the model.',
    height: 280,
    width: 520,
    x: {type: 'linear', label: 'Mode order', integer: true, min: 0.5, max: Math.max(1, ...modes.map((m) => m.order)) + 0.5},
    y: {label: 'Frequency', unit: 'Hz', min: 0},
    layers: [
      {kind: 'bars', name: 'Measured ± 1.96 σ', key: 'freq-ci', cls: 's-measured',
        data: modes.map((m) => ({x: m.order, lo: m.frequency_hz - 1.96 * (m.frequency_std_hz || 0), hi: m.frequency_hz + 1.96 * (m.frequency_std_hz || 0)}))},
      {kind: 'line', name: 'Measured', key: 'measured', cls: 's-measured', marker: 'circle', connect: false, data: modes.map((m) => ({x: m.order, y: m.frequency_hz, m}))},
      {kind: 'line', name: 'Model at the estimate', key: 'model', cls: 's-model', marker: 'cross', connect: false, data: modes.map((m) => ({x: m.order, y: m.model_frequency_hz, m}))},
    ],
    cursor: {layer: 'measured', describe: (p) => `mode ${p.m.order}: measured ${hz(p.m.frequency_hz)}, model ${hz(p.m.model_frequency_hz)}`},
  });
}

// The same comparison at a scale that shows it: model minus measured in
// per cent of the measured frequency, against the measurement's own 95 %
// uncertainty (bars around zero).
function differenceChart(r) {
  const modes = r.modes || [];
  const rel = (m) => (100 * (m.model_frequency_hz - m.frequency_hz)) / m.frequency_hz;
  const u = (m) => (100 * 1.96 * (m.frequency_std_hz || 0)) / m.frequency_hz;
  const inside = modes.filter((m) => Math.abs(rel(m)) <= u(m)).length;
  return plot({
    id: 'frequency-difference',
    title: 'Model − measured frequency',
    desc: modes.length ? `${inside} of ${modes.length} model frequencies lie within the 95 % uncertainty of the measured ones; ` +
      modes.map((m) => `mode ${m.order}: ${num(rel(m), 2)} % (±${num(u(m), 2)} %)`).join(', ') + '.' : 'No mode was paired with the model.',
    height: 280,
    width: 520,
    x: {type: 'linear', label: 'Mode order', integer: true, min: 0.5, max: Math.max(1, ...modes.map((m) => m.order)) + 0.5},
    y: {label: 'Model − measured', unit: '%'},
    layers: [
      {kind: 'hline', key: 'zero', cls: 's-zero', y: 0, legend: false},
      {kind: 'bars', name: 'Measured ± 1.96 σ', key: 'diff-ci', cls: 's-measured', data: modes.map((m) => ({x: m.order, lo: -u(m), hi: u(m)}))},
      {kind: 'line', name: 'Model − measured', key: 'difference', cls: 's-model', marker: 'cross', connect: false, data: modes.map((m) => ({x: m.order, y: rel(m), m}))},
    ],
    cursor: {layer: 'difference', describe: (p) => `mode ${p.m.order}: model − measured ${num(rel(p.m), 2)} %, measurement 95 % ±${num(u(p.m), 2)} %`},
  });
}

function frequencyTable(r) {
  const modes = r.modes || [];
  const rows = modes.map((m) => h('tr', null,
      h('th', {scope: 'row'}, String(m.order)),
      h('td', {class: 'num'}, `${num(m.frequency_hz, 3)} ± ${num(m.frequency_std_hz, 3)}`),
      h('td', {class: 'num'}, num(m.model_frequency_hz, 3)),
      h('td', {class: 'num'}, num(100 * (m.model_frequency_hz - m.frequency_hz) / m.frequency_hz, 2)),
      h('td', {class: 'num'}, num(m.damping_ratio * 100, 2)),
      h('td', {class: 'num'}, num(m.mac, 3))));
  for (const u of r.unpaired_modes || []) {
    rows.push(h('tr', {class: 'unpaired'}, h('th', {scope: 'row'}, '?'), h('td', {class: 'num'}, `${num(u.frequency_hz, 3)} ± ${num(u.frequency_std_hz, 3)}`),
        h('td', {colspan: 4}, 'not paired with a model mode')));
  }
  return h('table', {class: 'compact', id: 'modes-table'}, h('caption', null, 'Identified modes'),
      h('thead', null, h('tr', null, ['Mode', 'Measured [Hz] ± σ', 'Model [Hz]', 'Model − measured [%]', 'Damping [%]', 'MAC'].map((t) => h('th', {scope: 'col'}, t)))),
      h('tbody', null, rows));
}

// -------------------------------------------------------- mode shapes

function shapeCharts(sh) {
  if (!sh.modes.length) return h('p', {class: 'muted'}, 'No paired mode to draw.');
  const wrap = h('div', {class: 'shapes'});
  for (const m of sh.modes) {
    const curve = sh.x_m.map((x, i) => ({x, y: m.model_shape[i]}));
    wrap.append(plot({
      id: `shape-${m.order}`,
      title: `Mode ${m.order}: ${hz(m.measured_frequency_hz)} measured, ${hz(m.model_frequency_hz)} model, MAC ${num(m.mac, 3)}`,
      desc: `Shape along the ${num(sh.length_m, 2)} m member in the ${sh.plane} plane: the model curve and the measured values at ` +
        m.measured.map((q) => `${q.channel} (${num(q.position_m, 2)} m): ${num(q.value, 3)}`).join(', ') + '.',
      height: 250,
      width: 520,
      x: {type: 'linear', label: 'Position from the left end', unit: 'm', min: 0, max: sh.length_m, ticks: 6},
      y: {label: 'Shape (measured max |.| = 1)'},
      layers: [
        {kind: 'hline', key: 'zero', cls: 's-zero', y: 0, legend: false},
        {kind: 'line', name: 'Model along the member', key: 'model-shape', cls: 's-model', data: curve},
        {kind: 'line', name: 'Measured at the sensors', key: 'measured-shape', cls: 's-measured', marker: 'circle', connect: false,
          data: m.measured.map((q) => ({x: q.position_m, y: q.value, q}))},
      ],
      cursor: {layer: 'measured-shape', describe: (p) => `${p.q.channel} at ${num(p.q.position_m, 2)} m: measured ${num(p.q.value, 3)}`},
    }));
  }
  return h('div', null, wrap, h('p', {class: 'help'}, `Model: N = ${kN(sh.parameters.axial_force_n, 2)}, EI = ${kNm2(sh.parameters.bending_stiffness_nm2, 3)}, ` +
    `fixity ${num(sh.parameters.fixity_left, 2)} / ${num(sh.parameters.fixity_right, 2)}; ${sh.normalisation}.`));
}

// -------------------------------------------------------------- record

function readerNotes(notes) {
  if (!Array.isArray(notes) || notes.length === 0) return 'the canonical format, in m/s2, no conversion';
  return h('ul', {class: 'reader-notes'}, ...notes.map((n) => h('li', null, n)));
}

function recordFacts(rec) {
  const button = h('button', {type: 'button', class: 'primary', id: 'download'}, 'Download the record (CSV)');
  const status = h('span', {class: 'help', 'aria-live': 'polite'});
  button.addEventListener('click', async () => {
    status.textContent = ' Preparing…';
    try {
      const res = await api.raw(`/v1/records/${rec.id}/csv`);
      const url = URL.createObjectURL(await res.blob());
      const a = h('a', {href: url, download: `record-${rec.id}.csv`});
      document.body.append(a);
      a.click();
      a.remove();
      setTimeout(() => URL.revokeObjectURL(url), 10000);
      status.textContent = ` record-${rec.id}.csv downloaded.`;
    } catch (err) {
      status.textContent = ' ' + err.message;
    }
  });
  return h('div', null, dl([
    ['Recorded', when(rec.recorded_at)],
    ['Temperature', degC(rec.temperature_c)],
    ['Excitation', rec.excitation],
    ['Sampling', `${num(rec.sample_rate_hz, 2)} Hz, ${rec.sample_count} samples (${num(rec.sample_count / rec.sample_rate_hz, 1)} s)`],
    ['Channels', rec.channels.join(', ')],
    ['SHA-256 of the upload', h('code', {class: 'hash'}, rec.content_sha256)],
    // What the reader detected and applied at upload: the logger dialect,
    // skipped lines, units, and the calibration (sensitivity, serial,
    // calibration date, polarity) that turned volts into m/s2.
    ['As read', readerNotes(rec.reader_notes)],
  ]), h('p', null, button, status));
}

// Number, unit and time formatting, and small DOM helpers. Fixed locale
// (en-GB) so that every engineer reads the same digits; times are shown in
// the display time zone the user chose (UTC unless changed), stored and
// sent as UTC. Chart axes stay in UTC and say so.

const nf = (digits) => new Intl.NumberFormat('en-GB', {minimumFractionDigits: digits, maximumFractionDigits: digits});
const NF = [0, 1, 2, 3, 4].map(nf);

export function num(v, digits = 2) {
  if (v === null || v === undefined || !isFinite(v)) return '–';
  return NF[Math.min(digits, 4)].format(v);
}

// Significant digits, for values spanning decades (spectra, shapes).
export function sig(v, digits = 3) {
  if (v === null || v === undefined || !isFinite(v)) return '–';
  if (v === 0) return '0';
  const a = Math.abs(v);
  if (a >= 1e-3 && a < 1e5) return Number(v.toPrecision(digits)).toString();
  return v.toExponential(digits - 1).replace('e', '×10^').replace('^+', '^');
}

export const kN = (n, digits = 1) => num(n / 1000, digits) + ' kN';
export const kNm2 = (ei, digits = 2) => num(ei / 1000, digits) + ' kN·m²';
export const hz = (f, digits = 3) => num(f, digits) + ' Hz';
export const pct = (share, digits = 0) => num(share * 100, digits) + ' %';
export const degC = (t, digits = 1) => (t === null || t === undefined ? '–' : num(t, digits) + ' °C');

export function ms(iso) {
  return Date.parse(iso);
}

const pad = (n) => String(n).padStart(2, '0');
const MONTHS = ['Jan', 'Feb', 'Mar', 'Apr', 'May', 'Jun', 'Jul', 'Aug', 'Sep', 'Oct', 'Nov', 'Dec'];

// ---- display time zone: chosen per user, kept in this browser
// (localStorage); times are stored and sent as UTC whatever is chosen.

const ZONE_KEY = 'taut.timeZone';

export function displayZone() {
  const z = localStorage.getItem(ZONE_KEY) || 'UTC';
  try {
    new Intl.DateTimeFormat('en-GB', {timeZone: z});
    return z;
  } catch (e) {
    return 'UTC';
  }
}

export function setDisplayZone(zone) {
  if (!zone || zone === 'UTC') localStorage.removeItem(ZONE_KEY);
  else localStorage.setItem(ZONE_KEY, zone);
}

// The zones offered: UTC, the browser's own, then every IANA zone.
export function zoneChoices() {
  const local = Intl.DateTimeFormat().resolvedOptions().timeZone;
  const all = typeof Intl.supportedValuesOf === 'function' ? Intl.supportedValuesOf('timeZone') : [];
  return [...new Set(['UTC', local, ...all].filter(Boolean))];
}

const zoneFormats = new Map();
function partsIn(zone, t) {
  if (!zoneFormats.has(zone)) {
    zoneFormats.set(zone, new Intl.DateTimeFormat('en-GB', {timeZone: zone, year: 'numeric', month: '2-digit', day: '2-digit',
      hour: '2-digit', minute: '2-digit', hourCycle: 'h23', timeZoneName: 'short'}));
  }
  const o = {};
  for (const p of zoneFormats.get(zone).formatToParts(new Date(t))) o[p.type] = p.value;
  return o;
}

// "2026-11-20 10:00 UTC", or in the chosen zone: "2026-11-20 11:00 CET".
export function when(iso) {
  if (!iso) return '–';
  const zone = displayZone();
  if (zone === 'UTC') {
    const d = new Date(iso);
    return `${d.getUTCFullYear()}-${pad(d.getUTCMonth() + 1)}-${pad(d.getUTCDate())} ${pad(d.getUTCHours())}:${pad(d.getUTCMinutes())} UTC`;
  }
  const p = partsIn(zone, Date.parse(iso));
  return `${p.year}-${p.month}-${p.day} ${p.hour}:${p.minute} ${p.timeZoneName}`;
}

// The zone's name for column headings: "UTC" or "Europe/Paris".
export function zoneLabel() {
  return displayZone();
}

// A value for <input type=datetime-local> in the display zone, and back to
// an ISO UTC string.
export function toLocalInput(t) {
  const zone = displayZone();
  if (zone === 'UTC') return new Date(t).toISOString().slice(0, 16);
  const p = partsIn(zone, t);
  return `${p.year}-${p.month}-${p.day}T${p.hour}:${p.minute}`;
}
export function fromLocalInput(text) {
  // The instant whose wall time in the zone is `text`: start from it read
  // as UTC and correct by the zone's offset there (twice, for DST edges).
  const wall = Date.parse(text + ':00Z');
  let t = wall;
  for (let i = 0; i < 2; i++) {
    const p = partsIn(displayZone(), t);
    const shown = Date.parse(`${p.year}-${p.month}-${p.day}T${p.hour}:${p.minute}:00Z`);
    t += wall - shown;
  }
  return new Date(t).toISOString().replace(/\.\d+Z$/, 'Z');
}

export function dayLabel(t) {
  const d = new Date(t);
  return `${d.getUTCDate()} ${MONTHS[d.getUTCMonth()]}`;
}
export function monthLabel(t) {
  const d = new Date(t);
  return `${MONTHS[d.getUTCMonth()]} ${d.getUTCFullYear()}`;
}
export function hourLabel(t) {
  const d = new Date(t);
  return `${pad(d.getUTCHours())}:${pad(d.getUTCMinutes())}`;
}

// "3 h ago", "12 d ago"
export function ago(iso, now = Date.now()) {
  if (!iso) return 'never';
  const s = Math.max(0, (now - Date.parse(iso)) / 1000);
  if (s < 90) return 'just now';
  if (s < 90 * 60) return Math.round(s / 60) + ' min ago';
  if (s < 36 * 3600) return Math.round(s / 3600) + ' h ago';
  if (s < 60 * 86400) return Math.round(s / 86400) + ' d ago';
  return Math.round(s / (30.44 * 86400)) + ' months ago';
}

// ---- DOM: every text goes in through textContent (never innerHTML).

export function h(tag, attrs, ...children) {
  const el = document.createElement(tag);
  setAttrs(el, attrs);
  append(el, children);
  return el;
}

const SVGNS = 'http://www.w3.org/2000/svg';
export function s(tag, attrs, ...children) {
  const el = document.createElementNS(SVGNS, tag);
  setAttrs(el, attrs);
  append(el, children);
  return el;
}

function setAttrs(el, attrs) {
  if (!attrs) return;
  for (const [k, v] of Object.entries(attrs)) {
    if (v === null || v === undefined || v === false) continue;
    if (k === 'class') el.setAttribute('class', v);
    else if (k.startsWith('on') && typeof v === 'function') el.addEventListener(k.slice(2), v);
    else if (k === 'dataset') Object.assign(el.dataset, v);
    else el.setAttribute(k, v === true ? '' : String(v));
  }
}

function append(el, children) {
  for (const c of children.flat(Infinity)) {
    if (c === null || c === undefined || c === false) continue;
    el.append(c instanceof Node ? c : document.createTextNode(String(c)));
  }
}

let uid = 0;
export function nextId(prefix) {
  uid += 1;
  return `${prefix}-${uid}`;
}

// The v1 JSON API as the pages use it (docs/API.md). The token lives in
// sessionStorage only: it is gone when the browser tab closes and is never
// written to a cookie, so no other site can make the browser send it.

const TOKEN_KEY = 'taut.token';

export class ApiError extends Error {
  constructor(status, code, message) {
    super(message);
    this.status = status;
    this.code = code;
  }
}

export function token() {
  return sessionStorage.getItem(TOKEN_KEY) || '';
}

export function setToken(value) {
  if (value) sessionStorage.setItem(TOKEN_KEY, value);
  else sessionStorage.removeItem(TOKEN_KEY);
}

// Who the token belongs to ({organisation, role}); cached per page load.
let me = null;
export function cachedMe() {
  return me;
}
export function forgetMe() {
  me = null;
}

async function send(method, path, {body, type, headers, raw} = {}) {
  const h = Object.assign({Authorization: 'Bearer ' + token()}, headers || {});
  if (type) h['Content-Type'] = type;
  let res;
  try {
    res = await fetch(path, {method, headers: h, body, cache: 'no-store'});
  } catch (e) {
    throw new ApiError(0, 'network', 'The service did not answer (' + e.message + ').');
  }
  if (!res.ok) {
    let code = 'http-' + res.status, message = res.status + ' ' + res.statusText;
    try {
      const j = await res.json();
      if (j && j.error) {
        code = j.error.code;
        message = j.error.message;
      }
    } catch (e) {
      // not the API's error body: keep the status line
    }
    if (res.status === 401) {
      setToken('');
      forgetMe();
    }
    throw new ApiError(res.status, code, message);
  }
  if (raw) return res;
  if (res.status === 204) return null;
  return res.json();
}

export const api = {
  get: (path) => send('GET', path),
  post: (path, body, type) => send('POST', path, {body, type}),
  raw: (path) => send('GET', path, {raw: true}),
  async me() {
    if (!me) me = await send('GET', '/v1/me');
    return me;
  },
};

// Roles are ordered read < upload < admin (docs/API.md).
export function roleAtLeast(role, wanted) {
  const order = {read: 0, upload: 1, admin: 2};
  return (order[role] ?? -1) >= order[wanted];
}

// Query string from an object, skipping null/undefined.
export function qs(params) {
  const parts = [];
  for (const [k, v] of Object.entries(params)) {
    if (v !== null && v !== undefined) parts.push(encodeURIComponent(k) + '=' + encodeURIComponent(v));
  }
  return parts.length ? '?' + parts.join('&') : '';
}

// Hostile callers over HTTP, against the real service and PostgreSQL: forged, unsigned,
// re-signed, expired and otherwise not-ours access tokens on every route (with a body that
// would be accepted, so that a hole would show as a changed table); a refresh token replayed
// after sign-out; cross-site requests on the routes that read the session cookie; security
// headers and closed CORS on every route; the sign-in rate limit; the password policy.
// (test/integration/api-auth.test.ts has the plain cases: no token, one forged token, roles.)
import { createHmac } from 'node:crypto';
import knexFactory, { type Knex } from 'knex';
import { api, signIn, type Session } from '../support/api';
import { createTestDatabase, type TestDatabase } from '../support/database';
import {
  changedTables,
  fillPath,
  fingerprint,
  inPool,
  operationsOf,
  pathValues,
  prepareTargets,
  problemFault,
  queryBaseline,
  rawRequest,
  validBodies,
  type Operation,
  type Targets,
} from '../support/hostile';
import { runCli, startService, type ServiceHandle } from '../support/service';

jest.setTimeout(120_000);

const SECRET = 'hostile-auth-signing-key-0123456789-abcdefgh';
const EVIL = 'https://evil.example';
const PASSWORDS = {
  viewer: 'saltmarsh-viewer',
  responder: 'saltmarsh-responder',
  designer: 'saltmarsh-designer',
  admin: 'saltmarsh-admin',
} as const;

const b64 = (o: unknown) => Buffer.from(JSON.stringify(o)).toString('base64url');
const HMAC: Record<string, string> = { HS256: 'sha256', HS384: 'sha384', HS512: 'sha512' };

/** A JWT written by hand: any header, any claims, signed with `key` by the header's algorithm (or not at all). */
function jwtOf(header: Record<string, unknown>, claims: Record<string, unknown>, key: string | null): string {
  const head = `${b64(header)}.${b64(claims)}`;
  const alg = HMAC[String(header.alg)];
  return `${head}.${key === null || !alg ? '' : createHmac(alg, key).update(head).digest('base64url')}`;
}

const cookieValue = (cookie: string) => cookie.split('=').slice(1).join('=');

describe('hostile HTTP callers: tokens, sessions, cross-site requests, headers, rate limits, passwords', () => {
  let db: TestDatabase;
  let service: ServiceHandle;
  let knex: Knex;
  let operations: Operation[];
  let tableOps: Operation[];
  let targets: Targets;
  let bodies: Record<string, Record<string, unknown>>;
  const sessions = {} as Record<keyof typeof PASSWORDS, Session>;
  const userIds = {} as Record<keyof typeof PASSWORDS, number>;

  /** A request to an operation with valid parameters and body, and the given headers. */
  const call = (op: Operation, headers: Record<string, string>, query = '') => {
    const body = bodies[`${op.method} ${op.path}`];
    const base = new URLSearchParams(queryBaseline(op, targets)).toString();
    const q = [base, query].filter(Boolean).join('&');
    return rawRequest(service.url, {
      method: op.method.toUpperCase(),
      path: `/api${fillPath(op.path, pathValues(op, targets))}${q ? `?${q}` : ''}`,
      headers: { ...(body ? { 'content-type': 'application/json' } : {}), ...headers },
      body: body ? JSON.stringify(body) : undefined,
      timeoutMs: 10_000,
    });
  };

  const unchangedAfter = async (run: () => Promise<string[]>) => {
    const before = await fingerprint(knex);
    const faults = await run();
    return { faults, changed: changedTables(before, await fingerprint(knex)) };
  };

  const refreshRows = (userId: number) => knex('refresh_tokens').where({ user_id: userId }).orderBy('id').select('id', 'revoked_at', 'replaced_by');

  beforeAll(async () => {
    db = await createTestDatabase('hostile_http_auth');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    service = await startService({
      WHITECAP_DATABASE_URL: db.url,
      WHITECAP_JWT_SECRET: SECRET,
      WHITECAP_SIGN_IN_PER_MINUTE: '1000',
      WHITECAP_RUN_BROKER: 'false',
      WHITECAP_NOTIFICATIONS: 'false',
    });
    knex = knexFactory({ client: 'pg', connection: db.url, pool: { min: 0, max: 2 } });
    for (const role of Object.keys(PASSWORDS) as (keyof typeof PASSWORDS)[]) {
      sessions[role] = await signIn(service.url, `${role}@saltmarsh.example`, PASSWORDS[role]);
      userIds[role] = sessions[role].user.id;
    }
    operations = await operationsOf(service.url);
    tableOps = operations.filter((o) => o.ability);
    targets = await prepareTargets(knex, service.url, sessions.admin.accessToken);
    bodies = validBodies(targets);
  });
  afterAll(async () => {
    await knex?.destroy();
    await service?.stop();
    await db?.drop();
  });

  it('refuses every access token that is not one it issued, on every route, with 401 problem+json and nothing changed', async () => {
    const now = Math.floor(Date.now() / 1000);
    const admin = String(userIds.admin);
    const good = { sub: admin, role: 'admin', iat: now, exp: now + 600 };
    const realSignature = sessions.admin.accessToken.split('.')[2];
    const [viewerHead, , viewerSignature] = sessions.viewer.accessToken.split('.');
    const tokens: [string, string][] = [
      ['alg none, no signature', jwtOf({ alg: 'none', typ: 'JWT' }, good, null)],
      ['alg None', jwtOf({ alg: 'None', typ: 'JWT' }, good, null)],
      ['alg NONE with a real signature kept', `${b64({ alg: 'NONE', typ: 'JWT' })}.${b64(good)}.${realSignature}`],
      ['HS512 with the right key', jwtOf({ alg: 'HS512', typ: 'JWT' }, good, SECRET)],
      ['HS384 with the right key', jwtOf({ alg: 'HS384', typ: 'JWT' }, good, SECRET)],
      ['HS256 with another key', jwtOf({ alg: 'HS256', typ: 'JWT' }, good, 'another-key-entirely-0123456789-abcdef')],
      ['HS256 with an empty key', jwtOf({ alg: 'HS256', typ: 'JWT' }, good, '')],
      ['a key id pointing at a file, empty key', jwtOf({ alg: 'HS256', typ: 'JWT', kid: '../../../../dev/null' }, good, '')],
      ['RS256 header over an HMAC signature', jwtOf({ alg: 'RS256', typ: 'JWT' }, good, null) + createHmac('sha256', SECRET).update(`${b64({ alg: 'RS256', typ: 'JWT' })}.${b64(good)}`).digest('base64url')],
      ["a viewer's signature on an admin's claims", `${viewerHead}.${b64(good)}.${viewerSignature}`],
      ['expired a second ago', jwtOf({ alg: 'HS256', typ: 'JWT' }, { ...good, exp: now - 1 }, SECRET)],
      ['not valid for another hour', jwtOf({ alg: 'HS256', typ: 'JWT' }, { ...good, nbf: now + 3600 }, SECRET)],
      ['with no expiry', jwtOf({ alg: 'HS256', typ: 'JWT' }, { sub: admin, role: 'admin', iat: now }, SECRET)],
      ['for a user that does not exist', jwtOf({ alg: 'HS256', typ: 'JWT' }, { ...good, sub: '999999' }, SECRET)],
      ['with an SQL condition for a subject', jwtOf({ alg: 'HS256', typ: 'JWT' }, { ...good, sub: `${admin} or 1=1` }, SECRET)],
      ['with a subject past a database integer', jwtOf({ alg: 'HS256', typ: 'JWT' }, { ...good, sub: '2147483648' }, SECRET)],
      ['with a subject in exponent form', jwtOf({ alg: 'HS256', typ: 'JWT' }, { ...good, sub: `${admin}e0` }, SECRET)],
      ['with a numeric subject', jwtOf({ alg: 'HS256', typ: 'JWT' }, { ...good, sub: Number(admin) }, SECRET)],
      ['with no subject', jwtOf({ alg: 'HS256', typ: 'JWT' }, { role: 'admin', iat: now, exp: now + 600 }, SECRET)],
      ['the refresh token', cookieValue(sessions.admin.cookie)],
      ['a truncated real token', sessions.admin.accessToken.slice(0, -5)],
      ['garbage', "'; drop table users;--"],
    ];
    const headers: [string, Record<string, string>][] = [
      ...tokens.map(([label, t]): [string, Record<string, string>] => [label, { authorization: `Bearer ${t}` }]),
      ['Basic credentials of the admin', { authorization: `Basic ${Buffer.from(`admin@saltmarsh.example:${PASSWORDS.admin}`).toString('base64')}` }],
      ['a forged token followed by a real one', { authorization: `Bearer ${jwtOf({ alg: 'HS256', typ: 'JWT' }, good, 'another-key-entirely-0123456789-abcdef')} ${sessions.admin.accessToken}` }],
      ['an empty bearer', { authorization: 'Bearer ' }],
      ['the token in a cookie', { cookie: `access_token=${sessions.admin.accessToken}; jwt=${sessions.admin.accessToken}; ${sessions.admin.cookie}` }],
    ];
    const { faults, changed } = await unchangedAfter(async () => {
      const jobs: (() => Promise<string | null>)[] = [];
      for (const op of tableOps) {
        for (const [label, h] of headers) {
          jobs.push(async () => problemFault({ label: `${op.method.toUpperCase()} ${op.path} with ${label}`, res: await call(op, h), expect: [401] }));
        }
        // The token in the query string is not read either.
        jobs.push(async () =>
          problemFault({ label: `${op.method.toUpperCase()} ${op.path} with the token in the query`, res: await call(op, {}, `access_token=${sessions.admin.accessToken}`), expect: [401] }),
        );
      }
      expect(jobs.length).toBe(tableOps.length * (headers.length + 1));
      return (await inPool(jobs)).filter((f): f is string => f !== null);
    });
    expect(faults).toEqual([]);
    expect(changed).toEqual([]);
  });

  it("takes the role from the database, not from the token: a viewer's token claiming admin gets 403 on every route beyond reading", async () => {
    const now = Math.floor(Date.now() / 1000);
    const claimsAdmin = jwtOf({ alg: 'HS256', typ: 'JWT' }, { sub: String(userIds.viewer), role: 'admin', iat: now, exp: now + 600 }, SECRET);
    const beyondReading = tableOps.filter((o) => o.ability !== 'read');
    expect(beyondReading.length).toBeGreaterThan(25);
    const { faults, changed } = await unchangedAfter(async () =>
      (
        await inPool(
          beyondReading.map((op) => async () =>
            problemFault({ label: `${op.method.toUpperCase()} ${op.path}`, res: await call(op, { authorization: `Bearer ${claimsAdmin}` }), expect: [403] }),
          ),
        )
      ).filter((f): f is string => f !== null),
    );
    expect(faults).toEqual([]);
    expect(changed).toEqual([]);
  });

  it('refuses a refresh token replayed after sign-out, and ends every other session of that user with it', async () => {
    const designer = userIds.designer;
    const first = await signIn(service.url, 'designer@saltmarsh.example', PASSWORDS.designer);
    const second = await signIn(service.url, 'designer@saltmarsh.example', PASSWORDS.designer);
    const refresh = (cookie: string) => rawRequest(service.url, { method: 'POST', path: '/api/auth/refresh', headers: { cookie, 'x-whitecap-csrf': '1' } });
    const out = await rawRequest(service.url, { method: 'POST', path: '/api/auth/sign-out', headers: { cookie: first.cookie, 'x-whitecap-csrf': '1' } });
    expect(out.status).toBe(204);
    expect(String(out.headers['set-cookie'])).toMatch(/wc_refresh=;.*Expires=Thu, 01 Jan 1970/);

    const replay = await refresh(first.cookie);
    expect(problemFault({ label: 'replay after sign-out', res: replay, expect: [401] })).toBeNull();
    expect(JSON.parse(replay.text).type).toMatch(/session-expired$/);
    // A replay is taken as theft: the user's other session is over too, and no new token was issued.
    expect(problemFault({ label: 'the other session', res: await refresh(second.cookie), expect: [401] })).toBeNull();
    const rows = await refreshRows(designer);
    expect(rows.length).toBeGreaterThanOrEqual(2);
    expect(rows.filter((r) => r.revoked_at === null)).toEqual([]);
    expect(rows.filter((r) => r.replaced_by !== null)).toEqual([]);

    // Tokens that never were, and one that has expired: refused, nothing issued.
    const third = await signIn(service.url, 'designer@saltmarsh.example', PASSWORDS.designer);
    const { faults, changed } = await unchangedAfter(async () => {
      const out2: string[] = [];
      for (const [label, cookie] of [
        ['a made-up token', 'wc_refresh=AAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAA'],
        ['an SQL string', `wc_refresh=${encodeURIComponent("' or '1'='1")}`],
        ['a very long token', `wc_refresh=${'x'.repeat(8000)}`],
        ['an empty cookie', 'wc_refresh='],
      ]) {
        const fault = problemFault({ label, res: await refresh(cookie), expect: [401] });
        if (fault) out2.push(fault);
      }
      return out2;
    });
    expect(faults).toEqual([]);
    expect(changed).toEqual([]);
    await knex('refresh_tokens').where({ user_id: designer }).whereNull('revoked_at').update({ expires_at: new Date(Date.now() - 1000) });
    expect(problemFault({ label: 'an expired refresh token', res: await refresh(third.cookie), expect: [401] })).toBeNull();
    expect((await refreshRows(designer)).filter((r) => r.replaced_by !== null)).toEqual([]);
  });

  it('refuses cross-site requests on the routes that read or set the session cookie, and changes no session', async () => {
    const s = await signIn(service.url, 'responder@saltmarsh.example', PASSWORDS.responder);
    const own = service.url;
    const attempts: [string, string, Record<string, string>, string?][] = [
      ['refresh without the CSRF header', '/api/auth/refresh', {}],
      ['sign-out without the CSRF header', '/api/auth/sign-out', {}],
      ['refresh from a foreign origin', '/api/auth/refresh', { 'x-whitecap-csrf': '1', origin: EVIL }],
      ['sign-out from a foreign origin', '/api/auth/sign-out', { 'x-whitecap-csrf': '1', origin: EVIL }],
      ['refresh from an opaque origin', '/api/auth/refresh', { 'x-whitecap-csrf': '1', origin: 'null' }],
      ['refresh from a look-alike origin', '/api/auth/refresh', { 'x-whitecap-csrf': '1', origin: `${own}.evil.example` }],
      ['refresh marked cross-site', '/api/auth/refresh', { 'x-whitecap-csrf': '1', 'sec-fetch-site': 'cross-site' }],
      ['sign-out marked same-site (another subdomain)', '/api/auth/sign-out', { 'x-whitecap-csrf': '1', 'sec-fetch-site': 'same-site' }],
      ['a form posted to sign-out', '/api/auth/sign-out', { 'content-type': 'application/x-www-form-urlencoded', origin: EVIL }, 'a=1'],
      ['a text/plain post to refresh', '/api/auth/refresh', { 'content-type': 'text/plain', origin: EVIL }, '{}'],
    ];
    const { faults, changed } = await unchangedAfter(async () => {
      const out: string[] = [];
      for (const [label, path, headers, body] of attempts) {
        const res = await rawRequest(service.url, { method: 'POST', path, headers: { cookie: s.cookie, ...headers }, body });
        const fault = problemFault({ label, res, expect: [403] });
        if (fault) out.push(fault);
        if (res.headers['set-cookie']) out.push(`${label}: set a cookie`);
      }
      // Signing in from another site's page (login CSRF): refused, no session made.
      for (const [label, headers] of [
        ['sign-in from a foreign origin', { origin: EVIL }],
        ['sign-in marked cross-site', { 'sec-fetch-site': 'cross-site' }],
      ] as [string, Record<string, string>][]) {
        const res = await rawRequest(service.url, {
          method: 'POST',
          path: '/api/auth/sign-in',
          headers: { 'content-type': 'application/json', ...headers },
          body: JSON.stringify({ email: 'responder@saltmarsh.example', password: PASSWORDS.responder }),
        });
        const fault = problemFault({ label, res, expect: [403] });
        if (fault) out.push(fault);
        if (res.headers['set-cookie']) out.push(`${label}: set a cookie`);
      }
      return out;
    });
    expect(faults).toEqual([]);
    expect(changed).toEqual([]);

    // The same requests from the service's own pages go through.
    const same = await rawRequest(service.url, { method: 'POST', path: '/api/auth/refresh', headers: { cookie: s.cookie, 'x-whitecap-csrf': '1', origin: own, 'sec-fetch-site': 'same-origin' } });
    expect(same.status).toBe(200);
    const signedIn = await rawRequest(service.url, {
      method: 'POST',
      path: '/api/auth/sign-in',
      headers: { 'content-type': 'application/json', origin: own, 'sec-fetch-site': 'same-origin' },
      body: JSON.stringify({ email: 'responder@saltmarsh.example', password: PASSWORDS.responder }),
    });
    expect(signedIn.status).toBe(200);
    // The cookie a browser would keep: httpOnly, SameSite=Strict, only for /api/auth; answers not cached.
    const cookie = String(signedIn.headers['set-cookie']);
    expect(cookie).toMatch(/HttpOnly/i);
    expect(cookie).toMatch(/SameSite=Strict/i);
    expect(cookie).toMatch(/Path=\/api\/auth(;|$)/);
    expect(signedIn.headers['cache-control']).toBe('no-store');
    expect(same.headers['cache-control']).toBe('no-store');
  });

  it('sets security headers and grants no cross-origin access on every route, the dashboard and the docs', async () => {
    const targetsToCheck: { label: string; method: string; path: string }[] = [
      ...operations.map((op) => ({ label: `${op.method.toUpperCase()} ${op.path}`, method: op.method.toUpperCase(), path: `/api${fillPath(op.path, pathValues(op, targets))}` })),
      { label: 'the dashboard', method: 'GET', path: '/' },
      { label: 'a dashboard route', method: 'GET', path: '/fleet' },
      { label: 'the API docs', method: 'GET', path: '/api/docs/' },
      { label: 'an unknown API path', method: 'GET', path: '/api/no-such-thing' },
    ];
    const faults = (
      await inPool(
        targetsToCheck.flatMap((t) => [
          async () => {
            // A plain request from a foreign page (no credentials: /api/events answers 401 rather than streaming).
            const res = await rawRequest(service.url, { method: t.method, path: t.path, headers: { origin: EVIL }, timeoutMs: 10_000 });
            const h = res.headers;
            const wrong: string[] = [];
            const csp = String(h['content-security-policy'] ?? '');
            if (!csp.includes("default-src 'self'") || !csp.includes("frame-ancestors 'none'") || !csp.includes("object-src 'none'")) wrong.push(`CSP ${csp}`);
            if (h['x-content-type-options'] !== 'nosniff') wrong.push('x-content-type-options');
            if (!['SAMEORIGIN', 'DENY'].includes(String(h['x-frame-options']))) wrong.push('x-frame-options');
            if (h['referrer-policy'] !== 'no-referrer') wrong.push(`referrer-policy ${h['referrer-policy']}`);
            if (!/max-age=\d{6,}/.test(String(h['strict-transport-security']))) wrong.push('strict-transport-security');
            if (h['cross-origin-opener-policy'] !== 'same-origin') wrong.push('cross-origin-opener-policy');
            if (h['cross-origin-resource-policy'] !== 'same-origin') wrong.push('cross-origin-resource-policy');
            if (h['x-powered-by'] !== undefined) wrong.push('x-powered-by');
            for (const name of Object.keys(h)) if (name.startsWith('access-control-')) wrong.push(name);
            // (/api/health answers 503 here by design: this service runs without its broker.)
            if (res.status >= 500 && t.path !== '/api/health') wrong.push(`status ${res.status}`);
            return wrong.length ? `${t.label}: ${wrong.join(', ')}` : null;
          },
          async () => {
            // A CORS preflight from a foreign page asking for credentials and our headers: no grant.
            const res = await rawRequest(service.url, {
              method: 'OPTIONS',
              path: t.path,
              headers: { origin: EVIL, 'access-control-request-method': t.method, 'access-control-request-headers': 'authorization, content-type, x-whitecap-csrf' },
            });
            const granted = Object.keys(res.headers).filter((n) => n.startsWith('access-control-'));
            return granted.length || res.status >= 500 ? `preflight ${t.label}: ${res.status} ${granted.join(', ')}` : null;
          },
        ]),
      )
    ).filter((f): f is string => f !== null);
    expect(targetsToCheck.length).toBeGreaterThan(50);
    expect(faults).toEqual([]);
  });

  it('refuses weak passwords with 400 problem+json, whether an admin sets them or a user changes their own, and stores nothing', async () => {
    const email = 'new.engineer@saltmarsh.example';
    const own = 'responder@saltmarsh.example';
    /** Weak for anyone, and weak for the account with this e-mail address. */
    const weakFor = (address: string) => [
      '',
      'short',
      '123456789',
      'aaaaaaaaaaaa',
      '          ',
      'abababababab',
      '1234567890',
      '0123456789',
      'abcdefghijk',
      'password123',
      'Password123!',
      'qwertyuiop',
      'qwerty2024',
      address,
      address.toUpperCase(),
      address.split('@')[0],
      'x'.repeat(201),
    ];
    const responderHash = (await knex('users').where({ id: userIds.responder }).first('password_hash')).password_hash;
    const { faults, changed } = await unchangedAfter(async () => {
      const out: string[] = [];
      const weak = weakFor(email);
      const weakOwn = weakFor(own);
      for (const [i, password] of weak.entries()) {
        const created = await rawRequest(service.url, {
          method: 'POST',
          path: '/api/users',
          headers: { authorization: `Bearer ${sessions.admin.accessToken}`, 'content-type': 'application/json' },
          body: JSON.stringify({ email, displayName: 'New Engineer', role: 'viewer', password }),
        });
        const a = problemFault({ label: `POST /users with ${JSON.stringify(password).slice(0, 30)}`, res: created, expect: [400] });
        if (a) out.push(a);
        const changedOwn = await rawRequest(service.url, {
          method: 'POST',
          path: '/api/auth/password',
          headers: { authorization: `Bearer ${sessions.responder.accessToken}`, 'content-type': 'application/json' },
          body: JSON.stringify({ currentPassword: PASSWORDS.responder, newPassword: weakOwn[i] }),
        });
        const b = problemFault({ label: `POST /auth/password with ${JSON.stringify(weakOwn[i]).slice(0, 30)}`, res: changedOwn, expect: [400] });
        if (b) out.push(b);
      }
      return out;
    });
    expect(faults).toEqual([]);
    expect(changed).toEqual([]);
    expect((await knex('users').where({ id: userIds.responder }).first('password_hash')).password_hash).toBe(responderHash);
    // A decent password is taken: the policy is not refusing everything.
    const ok = await api(service.url, sessions.admin, '/users', { method: 'POST', body: { email, displayName: 'New Engineer', role: 'viewer', password: 'tide-gauge-47-north' } });
    expect(ok.status).toBe(201);
    await expect(signIn(service.url, email, 'tide-gauge-47-north')).resolves.toBeDefined();
  });

  it('answers hostile e-mail addresses at sign-in with 401 (or 400), touching no account', async () => {
    const { faults, changed } = await unchangedAfter(async () => {
      const out: string[] = [];
      for (const email of ["' or '1'='1", "admin@saltmarsh.example' --", '%', '*', 'admin@saltmarsh.example\u0000', 'ADMIN@SALTMARSH.EXAMPLE ', 'x'.repeat(321)]) {
        const res = await rawRequest(service.url, {
          method: 'POST',
          path: '/api/auth/sign-in',
          headers: { 'content-type': 'application/json' },
          body: JSON.stringify({ email, password: "' or '1'='1" }),
        });
        const fault = problemFault({ label: `sign-in as ${JSON.stringify(email).slice(0, 40)}`, res, expect: [400, 401] });
        if (fault) out.push(fault);
        if (res.headers['set-cookie']) out.push(`sign-in as ${email}: set a cookie`);
      }
      return out;
    });
    expect(faults).toEqual([]);
    // A wrong password for a real account is counted against it (the lock-out); these named none.
    expect(changed).toEqual([]);
  });

  describe('with a sign-in limit of 3 a minute, served as https', () => {
    let limited: ServiceHandle;
    beforeAll(async () => {
      limited = await startService({
        WHITECAP_DATABASE_URL: db.url,
        WHITECAP_JWT_SECRET: SECRET,
        WHITECAP_SIGN_IN_PER_MINUTE: '3',
        WHITECAP_PUBLIC_URL: 'https://whitecap.example',
        WHITECAP_RUN_BROKER: 'false',
        WHITECAP_NOTIFICATIONS: 'false',
      });
    });
    afterAll(async () => {
      await limited?.stop();
    });

    const signInTo = (email: string, password: string, headers: Record<string, string> = {}) =>
      rawRequest(limited.url, {
        method: 'POST',
        path: '/api/auth/sign-in',
        headers: { 'content-type': 'application/json', ...headers },
        body: JSON.stringify({ email, password }),
      });

    it('answers the fourth sign-in in a minute with 429 problem+json, even with the right password or a spoofed address, and makes no session', async () => {
      const first = await signInTo('viewer@saltmarsh.example', PASSWORDS.viewer, { origin: 'https://whitecap.example' });
      expect(first.status).toBe(200);
      expect(String(first.headers['set-cookie'])).toMatch(/;\s*Secure/i);
      expect(first.headers['ratelimit-policy']).toBeDefined();
      expect((await signInTo('nobody@saltmarsh.example', 'not-the-password')).status).toBe(401);
      expect((await signInTo('nobody@saltmarsh.example', 'not-the-password')).status).toBe(401);
      const { faults, changed } = await unchangedAfter(async () => {
        const out: string[] = [];
        for (const [label, headers, email] of [
          ['the right password', {}, 'viewer@saltmarsh.example'],
          ['a forwarded-for address', { 'x-forwarded-for': '203.0.113.9' }, 'viewer@saltmarsh.example'],
          ['a real-ip header', { 'x-real-ip': '198.51.100.7', forwarded: 'for=198.51.100.7' }, 'viewer@saltmarsh.example'],
          ['the e-mail in capitals', {}, 'VIEWER@SALTMARSH.EXAMPLE'],
        ] as [string, Record<string, string>, string][]) {
          const res = await signInTo(email, PASSWORDS.viewer, headers);
          const fault = problemFault({ label, res, expect: [429] });
          if (fault) out.push(fault);
          else if (!/too-many-requests$/.test(JSON.parse(res.text).type)) out.push(`${label}: type ${JSON.parse(res.text).type}`);
          if (res.headers['set-cookie']) out.push(`${label}: set a cookie`);
          if (!res.headers['ratelimit']) out.push(`${label}: no RateLimit header`);
        }
        return out;
      });
      expect(faults).toEqual([]);
      expect(changed).toEqual([]);
    });

    it('limits guesses of the current password through the change-password route the same way', async () => {
      const token = (await api(service.url, sessions.viewer, '/auth/me')).status === 200 ? sessions.viewer.accessToken : '';
      expect(token).not.toBe('');
      // Access tokens are signed with the same key, so the first service's token works here.
      const attempt = () =>
        rawRequest(limited.url, {
          method: 'POST',
          path: '/api/auth/password',
          headers: { authorization: `Bearer ${token}`, 'content-type': 'application/json' },
          body: JSON.stringify({ currentPassword: 'a-guess-at-it', newPassword: 'tide-gauge-47-south' }),
        });
      const statuses: number[] = [];
      for (let i = 0; i < 5; i++) statuses.push((await attempt()).status);
      expect(statuses).toEqual([401, 401, 401, 429, 429]);
      const last = await attempt();
      expect(problemFault({ label: 'the sixth guess', res: last, expect: [429] })).toBeNull();
    });
  });
});

// Sign-in, sessions and roles, against the real service. Every route in the route table
// is checked: no token → 401, a forged, expired or unsigned token → 401, a role without
// the route's ability → 403.
import jwt from 'jsonwebtoken';
import knexFactory from 'knex';
import { ROLE_ABILITIES, type Ability, type Role } from '../../shared/src/api/api-types';
import { apiRoutes } from '../../ingest/src/http/api-routes';
import { openApiPath } from '../../ingest/src/http/route-table';
import { ServiceEvents } from '../../ingest/src/events';
import { systemClock } from '../../ingest/src/clock';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { runCli, startService, type ServiceHandle } from '../support/service';
import { signIn, type Session } from '../support/api';

jest.setTimeout(90_000);

const SECRET = 'test-signing-key-0123456789-abcdefghijklmnop';
const ROLES: Role[] = ['viewer', 'responder', 'designer', 'admin'];

interface Operation {
  method: string;
  path: string;
  ability: Ability;
}

describe('API: sign-in, sessions and roles', () => {
  let db: TestDatabase;
  let service: ServiceHandle;
  let operations: Operation[];
  const sessions = {} as Record<Role, Session>;

  const call = (op: Operation, headers: Record<string, string> = {}) =>
    fetch(`${service.url}/api${op.path.replace(/\{[^}]+\}/g, '1')}`, {
      method: op.method.toUpperCase(),
      headers: { 'content-type': 'application/json', ...headers },
      body: op.method === 'get' || op.method === 'delete' ? undefined : '{}',
    });

  beforeAll(async () => {
    db = await createTestDatabase('api_auth');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    service = await startService({ WHITECAP_DATABASE_URL: db.url, WHITECAP_JWT_SECRET: SECRET, WHITECAP_SIGN_IN_PER_MINUTE: '1000' });
    const doc = await (await fetch(`${service.url}/api/openapi.json`)).json();
    operations = [];
    for (const [path, methods] of Object.entries<Record<string, { 'x-whitecap-ability'?: Ability }>>(doc.paths)) {
      for (const [method, op] of Object.entries(methods)) {
        if (op['x-whitecap-ability']) operations.push({ method, path, ability: op['x-whitecap-ability'] });
      }
    }
    for (const role of ROLES) sessions[role] = await signIn(service.url, `${role}@saltmarsh.example`, `saltmarsh-${role}`);
  });
  afterAll(async () => {
    await service?.stop();
    await db?.drop();
  });

  it('documents every route of the route table in the OpenAPI document', () => {
    const knex = knexFactory({ client: 'pg' }); // never connects: only the table is read
    const table = apiRoutes(knex, new ServiceEvents(), systemClock, { windowLength: 100, alpha: 0.001, alphaMarginal: 0.01, lags: 10, arl0: 1e7, fleetCacheMs: 0 });
    const documented = new Set(operations.map((o) => `${o.method} ${o.path}`));
    const declared = table.map((r) => `${r.method} ${openApiPath(r.path)}`);
    expect(declared.length).toBeGreaterThan(10);
    expect(declared.filter((d) => !documented.has(d))).toEqual([]);
    expect(operations).toHaveLength(declared.length);
    void knex.destroy();
  });

  it('answers 401 on every route without a token', async () => {
    for (const op of operations) {
      const res = await call(op);
      expect([op.path, res.status]).toEqual([op.path, 401]);
      expect(res.headers.get('content-type')).toContain('application/problem+json');
    }
  });

  it('answers 401 on every route with a forged, an expired or an unsigned token', async () => {
    const forged = jwt.sign({ sub: '1', role: 'admin' }, 'another-key-entirely-0123456789-abcdef', { algorithm: 'HS256' });
    const expired = jwt.sign({ sub: '1', role: 'admin', exp: Math.floor(Date.now() / 1000) - 60 }, SECRET, { algorithm: 'HS256' });
    const unsigned = `${Buffer.from(JSON.stringify({ alg: 'none', typ: 'JWT' })).toString('base64url')}.${Buffer.from(
      JSON.stringify({ sub: '1', role: 'admin' }),
    ).toString('base64url')}.`;
    for (const op of operations) {
      for (const token of [forged, expired, unsigned, 'not-a-token']) {
        const res = await call(op, { authorization: `Bearer ${token}` });
        expect([op.method, op.path, res.status]).toEqual([op.method, op.path, 401]);
      }
    }
  });

  it('answers 403 on every route to each role that lacks its ability, and lets the others through', async () => {
    for (const op of operations) {
      for (const role of ROLES) {
        const allowed = (ROLE_ABILITIES[op.ability] as readonly Role[]).includes(role);
        if (op.path === '/events' && allowed) continue; // a stream: checked in the resource tests
        const res = await call(op, { authorization: `Bearer ${sessions[role].accessToken}` });
        if (allowed) expect([op.method, op.path, role, [401, 403].includes(res.status)]).toEqual([op.method, op.path, role, false]);
        else expect([op.method, op.path, role, res.status]).toEqual([op.method, op.path, role, 403]);
      }
    }
  });

  it('refreshes a session from its cookie, rotates the refresh token, and ends every session when an old one is replayed', async () => {
    const s = await signIn(service.url, 'designer@saltmarsh.example', 'saltmarsh-designer');
    const refresh = (cookie: string, csrf = true) =>
      fetch(`${service.url}/api/auth/refresh`, { method: 'POST', headers: { cookie, ...(csrf ? { 'x-whitecap-csrf': '1' } : {}) } });
    expect((await refresh(s.cookie, false)).status).toBe(403); // no CSRF header: refused
    const first = await refresh(s.cookie);
    expect(first.status).toBe(200);
    const next = first.headers.get('set-cookie')!.split(';')[0];
    expect(next).not.toBe(s.cookie);
    expect((await first.json()).accessToken).toEqual(expect.any(String));
    // The old token again: refused, and the new one dies with it.
    expect((await refresh(s.cookie)).status).toBe(401);
    expect((await refresh(next)).status).toBe(401);
  });

  it('signs out: the refresh token no longer works', async () => {
    const s = await signIn(service.url, 'viewer@saltmarsh.example', 'saltmarsh-viewer');
    const out = await fetch(`${service.url}/api/auth/sign-out`, { method: 'POST', headers: { cookie: s.cookie, 'x-whitecap-csrf': '1' } });
    expect(out.status).toBe(204);
    const again = await fetch(`${service.url}/api/auth/refresh`, { method: 'POST', headers: { cookie: s.cookie, 'x-whitecap-csrf': '1' } });
    expect(again.status).toBe(401);
  });

  it('locks an account after 5 failed sign-ins in a row', async () => {
    const attempt = (password: string) =>
      fetch(`${service.url}/api/auth/sign-in`, {
        method: 'POST',
        headers: { 'content-type': 'application/json' },
        body: JSON.stringify({ email: 'responder@saltmarsh.example', password }),
      });
    for (let i = 0; i < 5; i++) expect((await attempt('wrong-password')).status).toBe(401);
    const locked = await attempt('saltmarsh-responder');
    expect(locked.status).toBe(423);
    expect((await locked.json()).detail).toMatch(/locked/);
  });

  it('lets an admin create a user, change the role and deactivate them; a deactivated user is out', async () => {
    const admin = sessions.admin;
    const post = await fetch(`${service.url}/api/users`, {
      method: 'POST',
      headers: { authorization: `Bearer ${admin.accessToken}`, 'content-type': 'application/json' },
      body: JSON.stringify({ email: 'new.engineer@saltmarsh.example', displayName: 'New Engineer', role: 'viewer', password: 'short' }),
    });
    expect(post.status).toBe(400); // password policy
    const created = await fetch(`${service.url}/api/users`, {
      method: 'POST',
      headers: { authorization: `Bearer ${admin.accessToken}`, 'content-type': 'application/json' },
      body: JSON.stringify({ email: 'new.engineer@saltmarsh.example', displayName: 'New Engineer', role: 'viewer', password: 'a-long-enough-password' }),
    });
    expect(created.status).toBe(201);
    const user = await created.json();
    const s = await signIn(service.url, 'new.engineer@saltmarsh.example', 'a-long-enough-password');
    expect(s.user.role).toBe('viewer');
    const patch = (body: unknown) =>
      fetch(`${service.url}/api/users/${user.id}`, {
        method: 'PATCH',
        headers: { authorization: `Bearer ${admin.accessToken}`, 'content-type': 'application/json' },
        body: JSON.stringify(body),
      });
    expect((await (await patch({ role: 'responder' })).json()).role).toBe('responder');
    expect((await patch({ active: false })).status).toBe(200);
    const me = await fetch(`${service.url}/api/auth/me`, { headers: { authorization: `Bearer ${s.accessToken}` } });
    expect(me.status).toBe(401);
    const again = await fetch(`${service.url}/api/auth/sign-in`, {
      method: 'POST',
      headers: { 'content-type': 'application/json' },
      body: JSON.stringify({ email: 'new.engineer@saltmarsh.example', password: 'a-long-enough-password' }),
    });
    expect(again.status).toBe(401);
  });

  it('lets a user change their own password, with the policy enforced', async () => {
    const s = await signIn(service.url, 'designer@saltmarsh.example', 'saltmarsh-designer');
    const change = (currentPassword: string, newPassword: string) =>
      fetch(`${service.url}/api/auth/password`, {
        method: 'POST',
        headers: { authorization: `Bearer ${s.accessToken}`, 'content-type': 'application/json' },
        body: JSON.stringify({ currentPassword, newPassword }),
      });
    expect((await change('not-my-password', 'another-long-password')).status).toBe(401);
    expect((await change('saltmarsh-designer', 'aaaaaaaaaaaa')).status).toBe(400);
    expect((await change('saltmarsh-designer', 'designer@saltmarsh.example')).status).toBe(400);
    expect((await change('saltmarsh-designer', 'a-new-designer-password')).status).toBe(204);
    await expect(signIn(service.url, 'designer@saltmarsh.example', 'a-new-designer-password')).resolves.toBeDefined();
  });

  it('rate-limits sign-in attempts from one address', async () => {
    const limited = await startService({ WHITECAP_DATABASE_URL: db.url, WHITECAP_SIGN_IN_PER_MINUTE: '3' });
    try {
      const statuses: number[] = [];
      for (let i = 0; i < 5; i++) {
        const res = await fetch(`${limited.url}/api/auth/sign-in`, {
          method: 'POST',
          headers: { 'content-type': 'application/json' },
          body: JSON.stringify({ email: 'nobody@saltmarsh.example', password: 'whatever-it-is' }),
        });
        statuses.push(res.status);
      }
      expect(statuses).toEqual([401, 401, 401, 429, 429]);
    } finally {
      await limited.stop();
    }
  });

  it('sets security headers and sends no CORS permission', async () => {
    const res = await fetch(`${service.url}/api/health`, { headers: { origin: 'https://elsewhere.example' } });
    expect(res.headers.get('x-content-type-options')).toBe('nosniff');
    expect(res.headers.get('content-security-policy')).toContain("default-src 'self'");
    expect(res.headers.get('access-control-allow-origin')).toBeNull();
  });
});

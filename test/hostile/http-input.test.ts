// Hostile input over HTTP, against the real service and PostgreSQL. Every route the service
// documents (its OpenAPI document, generated from the route table) gets injection strings
// in every query parameter, nonsense in every path parameter, malformed JSON, values of the
// wrong type in every body property, bodies that are not JSON, and an oversized body. Each
// case must be answered with a 4xx problem+json (or, for a text filter that matches
// nothing, an empty page), never a 5xx, and every table must be exactly as it was.
import knexFactory, { type Knex } from 'knex';
import type { ZodType } from 'zod';
import { systemClock } from '../../ingest/src/clock';
import { ServiceEvents } from '../../ingest/src/events';
import { apiRoutes } from '../../ingest/src/http/api-routes';
import { openApiPath, type RouteDef } from '../../ingest/src/http/route-table';
import { api, signIn, type Session } from '../support/api';
import { createTestDatabase, type TestDatabase } from '../support/database';
import {
  INJECTION_STRINGS,
  MALFORMED_JSON,
  changedTables,
  fillPath,
  fingerprint,
  inPool as pool,
  operationsOf,
  pathValues as pathValuesFor,
  prepareTargets,
  problemFault,
  queryBaseline as queryBaselineFor,
  rawRequest,
  typesOf,
  validBodies,
  wrongValues,
  type JsonSchema,
  type Operation,
  type Targets,
} from '../support/hostile';
import { runCli, startService, type ServiceHandle } from '../support/service';

jest.setTimeout(120_000);

const SECRET = 'hostile-input-signing-key-0123456789-abcdef';
const ADMIN = { email: 'admin@saltmarsh.example', password: 'saltmarsh-admin' };

/** Numbers and near-numbers for numeric and id parameters, beside the injection strings. */
const NUMERIC_STRINGS = ['-1', '0', '1.5', '1e309', 'NaN', 'Infinity', '2147483648', '99999999999999999999', '9007199254740993', ' ', ''];

/** For parameters that are not free text: one of each kind of injection string. */
const INJECTION_SAMPLE = ["'; drop table users;--", '1 or 1=1', '{"$ne": null}', '../../../../etc/passwd', 'a\u0000b', 'ẞtraße ✓ 🛰️ 漢字 العربية', 'x'.repeat(5000)];

/** Path parameter values, written into the path as they are (some are deliberately broken percent-encoding). */
const PATH_VALUES: readonly { label: string; raw: string; decoded: string | null }[] = [
  { label: 'letters', raw: 'abc', decoded: 'abc' },
  { label: 'negative', raw: '-1', decoded: '-1' },
  { label: 'zero', raw: '0', decoded: '0' },
  { label: 'a fraction', raw: '1.5', decoded: '1.5' },
  { label: 'past a database integer', raw: '2147483648', decoded: '2147483648' },
  { label: 'past a safe integer', raw: '99999999999999999999', decoded: '99999999999999999999' },
  { label: 'an SQL condition', raw: encodeURIComponent('1 or 1=1'), decoded: '1 or 1=1' },
  { label: 'an SQL statement', raw: encodeURIComponent("1'; drop table users;--"), decoded: "1'; drop table users;--" },
  { label: 'a NUL byte', raw: '%00', decoded: '\u0000' },
  { label: 'an encoded traversal', raw: '..%2F..%2F..%2Fetc%2Fpasswd', decoded: '../../../etc/passwd' },
  { label: 'broken percent-encoding', raw: '%E0%A4%A', decoded: null },
  { label: 'an overlong UTF-8 dot', raw: '%C0%AE%C0%AE', decoded: null },
];

/** A JSON object written by hand, so that a property's value can be any JSON text (1e400, deep nesting). */
function objectText(base: Record<string, unknown>, key?: string, json?: string): string {
  const entries = Object.entries(base).filter(([k]) => k !== key).map(([k, v]) => `${JSON.stringify(k)}:${JSON.stringify(v)}`);
  if (key !== undefined) entries.push(`${JSON.stringify(key)}:${json}`);
  return `{${entries.join(',')}}`;
}

describe('hostile HTTP input: every route, every parameter', () => {
  let db: TestDatabase;
  let service: ServiceHandle;
  let knex: Knex;
  let admin: Session;
  let operations: Operation[];
  const table = new Map<string, RouteDef>();
  let ids: Targets;
  let bodies: Record<string, Record<string, unknown>>;
  let counts = { query: 0, path: 0, malformed: 0, wrongType: 0, mediaType: 0, oversized: 0 };

  const key = (method: string, path: string) => `${method} ${path}`;
  const def = (op: Operation) => table.get(key(op.method, op.path));
  const bearer = () => ({ authorization: `Bearer ${admin.accessToken}` });

  const pathValues = (op: Operation) => pathValuesFor(op, ids);
  const queryBaseline = (op: Operation) => queryBaselineFor(op, ids);

  const send = (op: Operation, opts: { path?: string; query?: string; headers?: Record<string, string | number>; body?: string | Buffer }) =>
    rawRequest(service.url, {
      method: op.method.toUpperCase(),
      path: `/api${opts.path ?? fillPath(op.path, pathValues(op))}${opts.query ? `?${opts.query}` : ''}`,
      headers: { ...bearer(), ...opts.headers },
      body: opts.body,
    });

  /** Runs the cases and expects every table to be as it was; returns what went wrong. */
  const unchangedAfter = async (run: () => Promise<string[]>): Promise<{ faults: string[]; changed: string[] }> => {
    const before = await fingerprint(knex);
    const faults = await run();
    const changed = changedTables(before, await fingerprint(knex));
    return { faults, changed };
  };

  beforeAll(async () => {
    db = await createTestDatabase('hostile_http_input');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    service = await startService({
      WHITECAP_DATABASE_URL: db.url,
      WHITECAP_JWT_SECRET: SECRET,
      WHITECAP_SIGN_IN_PER_MINUTE: '1000',
      WHITECAP_RUN_BROKER: 'false',
      WHITECAP_NOTIFICATIONS: 'false',
    });
    knex = knexFactory({ client: 'pg', connection: db.url, pool: { min: 0, max: 2 } });
    admin = await signIn(service.url, ADMIN.email, ADMIN.password);
    operations = await operationsOf(service.url);
    const offline = knexFactory({ client: 'pg' }); // never connects: only the route table is read
    // (A variable rather than a literal: settings the table does not take are ignored, not a type error.)
    const settings = { windowLength: 100, alpha: 0.001, alphaMarginal: 0.01, lags: 10, arl0: 1e7, fleetCacheMs: 0 };
    for (const r of apiRoutes(offline, new ServiceEvents(), systemClock, settings)) {
      table.set(key(r.method, openApiPath(r.path)), r);
    }
    void offline.destroy();

    ids = await prepareTargets(knex, service.url, admin.accessToken);
    bodies = validBodies(ids);
    counts = { query: 0, path: 0, malformed: 0, wrongType: 0, mediaType: 0, oversized: 0 };
  });
  afterAll(async () => {
    // eslint-disable-next-line no-console
    console.log(`hostile HTTP input cases: ${JSON.stringify(counts)}`);
    await knex?.destroy();
    await service?.stop();
    await db?.drop();
  });

  it('covers every route of the route table, with a valid body for each that takes one (checked against its schema)', () => {
    const documented = new Set(operations.map((o) => key(o.method, o.path)));
    expect([...table.keys()].filter((k) => !documented.has(k))).toEqual([]);
    expect(table.size).toBeGreaterThan(40);
    const withBody = operations.filter((o) => o.body);
    expect(withBody.map((o) => key(o.method, o.path)).filter((k) => !bodies[k])).toEqual([]);
    for (const op of withBody) {
      const d = def(op);
      if (!d?.body) continue; // the auth routes: outside the table
      const r = (d.body as ZodType).safeParse(bodies[key(op.method, op.path)]);
      expect([key(op.method, op.path), r.success ? 'valid' : r.error.issues]).toEqual([key(op.method, op.path), 'valid']);
    }
    for (const op of operations.filter((o) => def(o)?.query)) {
      const r = (def(op)!.query as ZodType).safeParse(queryBaseline(op));
      expect([key(op.method, op.path), r.success ? 'valid' : r.error.issues]).toEqual([key(op.method, op.path), 'valid']);
    }
  });

  it('answers injection strings in every query parameter of every GET route with a 400 problem, or an empty page for a text filter', async () => {
    const gets = operations.filter((o) => o.method === 'get' && o.params.some((p) => p.in === 'query'));
    expect(gets.length).toBeGreaterThan(10);
    const { faults, changed } = await unchangedAfter(async () => {
      const out: string[] = [];
      const jobs: (() => Promise<void>)[] = [];
      for (const op of gets) {
        const schema = def(op)!.query as ZodType;
        const base = queryBaseline(op);
        // What the unfiltered list holds: a text filter with a value found nowhere in it must give an empty page.
        const limitParam: Record<string, string> = op.params.some((p) => p.name === 'limit') ? { limit: '500' } : {};
        const unfiltered = await send(op, { query: new URLSearchParams({ ...base, ...limitParam }).toString() });
        const everything = unfiltered.text.toLowerCase();
        for (const p of op.params.filter((x) => x.in === 'query')) {
          const isText = typesOf(p.schema).includes('string') && !p.schema.enum && !p.schema.format && !p.schema.pattern && !p.schema.anyOf;
          // Every injection string in a text filter; a sample of them, and the near-numbers, in the others (which refuse any of them).
          const values: (string | string[])[] = [
            ...(isText ? INJECTION_STRINGS : INJECTION_SAMPLE),
            ...(isText ? [' ', ''] : NUMERIC_STRINGS),
            [String(p.schema.enum?.[0] ?? '1'), "' or 1=1 --"],
          ];
          for (const value of values) {
            jobs.push(async () => {
              counts.query += 1;
              const q = new URLSearchParams(base);
              q.delete(p.name);
              for (const v of Array.isArray(value) ? value : [value]) q.append(p.name, v);
              const label = `GET ${op.path}?${p.name}=${JSON.stringify(value).slice(0, 40)}`;
              const res = await send(op, { query: q.toString() });
              const local = schema.safeParse({ ...base, [p.name]: value });
              if (!local.success) {
                const fault = problemFault({ label, res, expect: [400], names: p.name });
                if (fault) out.push(fault);
                return;
              }
              if (res.status >= 500) return void out.push(`${label}: answered ${res.status} ${res.text.slice(0, 200)}`);
              if (res.status >= 400) {
                const fault = problemFault({ label, res });
                if (fault) out.push(fault);
                return;
              }
              const probe = (Array.isArray(value) ? value[value.length - 1] : value).trim().toLowerCase();
              if (isText && probe !== '' && !everything.includes(probe) && !everything.includes(JSON.stringify(probe).slice(1, -1))) {
                const body = JSON.parse(res.text);
                const n = typeof body.total === 'number' ? body.total : Array.isArray(body.items) ? body.items.length : Array.isArray(body) ? body.length : Array.isArray(body.rows) ? body.rows.length : -1;
                if (n !== 0) out.push(`${label}: a filter matching nothing gave ${n} rows`);
              }
            });
          }
        }
      }
      await pool(jobs);
      return out;
    });
    expect(faults).toEqual([]);
    expect(changed).toEqual([]);
  });

  it('refuses nonsense in every path parameter with a 4xx problem (never acting on a row)', async () => {
    const withParams = operations.filter((o) => def(o) && o.params.some((p) => p.in === 'path'));
    expect(withParams.length).toBeGreaterThan(15);
    const { faults, changed } = await unchangedAfter(async () => {
      const out: string[] = [];
      const jobs: (() => Promise<void>)[] = [];
      for (const op of withParams) {
        if (op.path === '/residual-uploads') continue;
        const body = bodies[key(op.method, op.path)];
        for (const p of op.params.filter((x) => x.in === 'path')) {
          const values = p.schema.enum ? [...PATH_VALUES, { label: 'an SQL condition after a value', raw: encodeURIComponent("warning' or '1'='1"), decoded: "warning' or '1'='1" }] : PATH_VALUES;
          for (const v of values) {
            jobs.push(async () => {
              counts.path += 1;
              const path = fillPath(op.path, { ...pathValues(op), [p.name]: v.raw }, [p.name]);
              const res = await send(op, {
                path,
                headers: body ? { 'content-type': 'application/json' } : {},
                body: body ? JSON.stringify(body) : undefined,
              });
              const label = `${op.method.toUpperCase()} ${op.path} with ${p.name} = ${v.label}`;
              const local = v.decoded === null ? null : (def(op)!.params as ZodType).safeParse({ ...pathValues(op), [p.name]: v.decoded });
              const fault = problemFault({ label, res, ...(local && !local.success ? { expect: [400], names: p.name } : {}) });
              if (fault) out.push(fault);
            });
          }
        }
      }
      await pool(jobs);
      return out;
    });
    expect(faults).toEqual([]);
    expect(changed).toEqual([]);
  });

  it('refuses malformed JSON on every route that takes a request body with 400 malformed-json', async () => {
    const writes = operations.filter((o) => o.method !== 'get');
    expect(writes.length).toBeGreaterThan(20);
    const { faults, changed } = await unchangedAfter(async () => {
      const out: string[] = [];
      const jobs: (() => Promise<void>)[] = [];
      for (const op of writes) {
        const query = op.path === '/residual-uploads' ? new URLSearchParams(queryBaseline(op)).toString() : undefined;
        for (const m of MALFORMED_JSON) {
          jobs.push(async () => {
            counts.malformed += 1;
            const res = await send(op, { query, headers: { 'content-type': 'application/json', 'x-whitecap-csrf': '1' }, body: m.body });
            const fault = problemFault({ label: `${op.method.toUpperCase()} ${op.path} with ${m.label}`, res, expect: [400] });
            if (fault) out.push(fault);
            else if (!JSON.parse(res.text).type.endsWith('/malformed-json')) out.push(`${op.method} ${op.path} with ${m.label}: type ${JSON.parse(res.text).type}`);
          });
        }
      }
      await pool(jobs);
      return out;
    });
    expect(faults).toEqual([]);
    expect(changed).toEqual([]);
  });

  it('refuses a value of the wrong type, out of range or absurdly nested in every body property with a 4xx problem naming it', async () => {
    const withBody = operations.filter((o) => o.body?.properties);
    const { faults, changed } = await unchangedAfter(async () => {
      const out: string[] = [];
      const jobs: (() => Promise<void>)[] = [];
      for (const op of withBody) {
        const base = bodies[key(op.method, op.path)];
        const schema = def(op)?.body as ZodType | undefined;
        for (const [prop, propSchema] of Object.entries(op.body!.properties!)) {
          for (const w of wrongValues(propSchema as JsonSchema)) {
            jobs.push(async () => {
              counts.wrongType += 1;
              const text = objectText(base, prop, w.json);
              const res = await send(op, { headers: { 'content-type': 'application/json' }, body: text });
              const local = schema?.safeParse(JSON.parse(text));
              const fault = problemFault({ label: `${op.method.toUpperCase()} ${op.path} with ${prop} ${w.label}`, res, ...(local && !local.success ? { names: prop } : {}) });
              if (fault) out.push(fault);
            });
          }
        }
        // The body itself of the wrong kind: an array, and an object with none of the expected properties.
        for (const [label, text] of [
          ['an array body', `[${JSON.stringify(base)}]`],
          ['an empty array body', '[]'],
          ['prototype keys only', '{"__proto__": {"role": "admin"}, "constructor": {"prototype": {"role": "admin"}}}'],
        ]) {
          jobs.push(async () => {
            counts.wrongType += 1;
            const res = await send(op, { headers: { 'content-type': 'application/json' }, body: text });
            const fault = problemFault({ label: `${op.method.toUpperCase()} ${op.path} with ${label}`, res });
            if (fault) out.push(fault);
          });
        }
      }
      await pool(jobs);
      return out;
    });
    expect(faults).toEqual([]);
    expect(changed).toEqual([]);
  });

  it('refuses a valid body that is not sent as JSON (text, form, unknown charset or encoding) with 4xx on every JSON route', async () => {
    const withBody = operations.filter((o) => o.body && def(o));
    const variants: { label: string; headers: Record<string, string>; body?: (json: string) => string | Buffer }[] = [
      { label: 'text/plain', headers: { 'content-type': 'text/plain' } },
      { label: 'a form', headers: { 'content-type': 'application/x-www-form-urlencoded' } },
      { label: 'multipart', headers: { 'content-type': 'multipart/form-data; boundary=x' } },
      { label: 'no content type', headers: {} },
      { label: 'a latin-1 charset', headers: { 'content-type': 'application/json; charset=latin1' } },
      { label: 'an unknown content encoding', headers: { 'content-type': 'application/json', 'content-encoding': 'compress' } },
      { label: 'gzip that is not gzip', headers: { 'content-type': 'application/json', 'content-encoding': 'gzip' } },
      { label: 'brotli that is not brotli', headers: { 'content-type': 'application/json', 'content-encoding': 'br' }, body: () => Buffer.from([0xff, 0xff, 0xff, 0xff]) },
    ];
    const { faults, changed } = await unchangedAfter(async () => {
      const out: string[] = [];
      const jobs: (() => Promise<void>)[] = [];
      for (const op of withBody) {
        const json = JSON.stringify(bodies[key(op.method, op.path)]);
        for (const v of variants) {
          jobs.push(async () => {
            counts.mediaType += 1;
            const res = await send(op, { headers: v.headers, body: v.body ? v.body(json) : Buffer.from(json) });
            const fault = problemFault({ label: `${op.method.toUpperCase()} ${op.path} as ${v.label}`, res, expect: [400, 415] });
            if (fault) out.push(fault);
          });
        }
      }
      await pool(jobs);
      return out;
    });
    expect(faults).toEqual([]);
    expect(changed).toEqual([]);
  });

  it('refuses a body over the 1 MB limit on every route that takes one with 413 problem+json', async () => {
    const writes = operations.filter((o) => o.method !== 'get');
    const big = JSON.stringify({ note: 'x'.repeat(1_100_000) });
    const { faults, changed } = await unchangedAfter(async () => {
      const out: string[] = [];
      await pool(
        writes.map((op) => async () => {
          counts.oversized += 1;
          const query = op.path === '/residual-uploads' ? new URLSearchParams(queryBaseline(op)).toString() : undefined;
          const res = await send(op, { query, headers: { 'content-type': 'application/json', 'x-whitecap-csrf': '1' }, body: big });
          const fault = problemFault({ label: `${op.method.toUpperCase()} ${op.path} with 1.1 MB`, res, expect: [413] });
          if (fault) out.push(fault);
        }),
        2,
      );
      return out;
    });
    expect(faults).toEqual([]);
    expect(changed).toEqual([]);
  });

  it('refuses residual upload names that are paths or carry control characters, storing nothing; odd but harmless names are kept verbatim', async () => {
    const csv = 'seq,t,nu_1\n1,2026-01-01T00:00:00Z,0.1\n2,2026-01-01T00:00:01Z,-0.2\n3,2026-01-01T00:00:02Z,0.05\n';
    const upload = (name: string) =>
      rawRequest(service.url, {
        method: 'POST',
        path: `/api/residual-uploads?${new URLSearchParams({ designRevisionId: String(ids.thermalRevision), name })}`,
        headers: { ...bearer(), 'content-type': 'text/csv' },
        body: csv,
      });
    const refused = [
      '../../../../etc/passwd',
      '..\\..\\windows\\win.ini',
      '/etc/passwd',
      'C:\\Windows\\win.ini',
      'runs/../../secret',
      '..',
      '.',
      'run\u0000.csv',
      'run\nSet-Cookie: x=1',
      'run\r\n\r\n<html>',
      '\u202ecsv.exe',
      'run\u0007bell',
      'x'.repeat(201),
      '   ',
    ];
    const { faults, changed } = await unchangedAfter(async () => {
      const out: string[] = [];
      for (const name of refused) {
        const fault = problemFault({ label: `upload named ${JSON.stringify(name).slice(0, 40)}`, res: await upload(name), expect: [400], names: 'name' });
        if (fault) out.push(fault);
      }
      return out;
    });
    expect(faults).toEqual([]);
    expect(changed).toEqual([]);

    // A label is a label: quotes, SQL words, percent signs and other scripts are stored as they were written.
    const kept = ["Tractor 34's run; 'quoted' -- drop table users", '1 or 1=1', '100% 漢字 ẞ 🛰️', '<img src=x onerror=alert(1)>'];
    const usersBefore = await knex('users').orderBy('id').select('*');
    for (const name of kept) {
      const res = await upload(name);
      expect([name, res.status]).toEqual([name, 201]);
      const id = JSON.parse(res.text).id as number;
      expect((await knex('residual_uploads').where({ id }).first('name')).name).toBe(name);
      expect(Number((await knex('residual_upload_samples').where({ upload_id: id }).count<{ count: string }[]>('* as count'))[0].count)).toBe(3);
    }
    expect(await knex('users').orderBy('id').select('*')).toEqual(usersBefore);
  });

  it('keeps fields an admin may not set out of the users table, and refuses a second account for an e-mail in another case', async () => {
    const viewerBefore = await knex('users').where({ id: ids.users }).first('*');
    const { faults, changed } = await unchangedAfter(async () => {
      const out: string[] = [];
      const cases: [string, unknown][] = [
        ['only columns that are not editable', { email: 'admin@saltmarsh.example', password_hash: 'x', passwordHash: 'x', id: 1, failed_sign_ins: 0 }],
        ['an SQL fragment for a role', { role: "admin' --" }],
        ['a role that does not exist', { role: 'root' }],
      ];
      for (const [label, body] of cases) {
        const res = await send(operations.find((o) => o.method === 'patch' && o.path === '/users/{id}')!, { headers: { 'content-type': 'application/json' }, body: JSON.stringify(body) });
        const fault = problemFault({ label: `PATCH /users with ${label}`, res, expect: [400] });
        if (fault) out.push(fault);
      }
      for (const email of ['ADMIN@saltmarsh.example', 'Admin@SaltMarsh.Example']) {
        const res = await api(service.url, admin, '/users', { method: 'POST', body: { email, displayName: 'Impostor', role: 'admin', password: 'a-long-enough-password' } });
        if (res.status !== 409) out.push(`POST /users with ${email}: ${res.status}`);
      }
      for (const email of [" admin@saltmarsh.example' --", 'admin@saltmarsh.example\u0000', 'a@b', '"><script>@x.example']) {
        const res = await api(service.url, admin, '/users', { method: 'POST', body: { email, displayName: 'Impostor', role: 'admin', password: 'a-long-enough-password' } });
        if (res.status !== 400) out.push(`POST /users with ${JSON.stringify(email)}: ${res.status}`);
      }
      return out;
    });
    expect(faults).toEqual([]);
    expect(changed).toEqual([]);
    // Known and unknown fields together: the known one is applied, nothing else.
    const mixed = await api(service.url, admin, `/users/${ids.users}`, { method: 'PATCH', body: { displayName: 'Vera O.', email: 'admin@saltmarsh.example', password_hash: 'x', role: 'viewer' } });
    expect(mixed.status).toBe(200);
    const after = await knex('users').where({ id: ids.users }).first('*');
    expect({ ...after, display_name: viewerBefore.display_name }).toEqual(viewerBefore);
    expect(after.display_name).toBe('Vera O.');
  });

  it('serves nothing outside the dashboard and API docs folders for traversal paths', async () => {
    const paths = [
      '/../../../../etc/passwd',
      '/..%2f..%2f..%2f..%2fetc%2fpasswd',
      '/%2e%2e/%2e%2e/%2e%2e/etc/passwd',
      '/api/docs/..%2f..%2f..%2fpackage.json',
      '/api/docs/%2e%2e/%2e%2e/%2e%2e/package.json',
      '/api/docs/../../../package.json',
      '/assets/..%5c..%5c..%5cpackage.json',
      '/%c0%ae%c0%ae/%c0%ae%c0%ae/package.json',
      '/index.html%00.json',
      '/api/..;/..;/package.json',
      '/....//....//package.json',
    ];
    const out: string[] = [];
    for (const path of paths) {
      const res = await rawRequest(service.url, { path });
      if (res.status >= 500) out.push(`${path}: ${res.status}`);
      if (/root:.*:0:0:|"name":\s*"whitecap"|"devDependencies"/.test(res.text)) out.push(`${path}: leaked a file`);
      if (res.status >= 400 && !String(res.headers['content-type']).startsWith('application/problem+json')) out.push(`${path}: ${res.status} ${res.headers['content-type']}`);
    }
    expect(out).toEqual([]);
  });
});

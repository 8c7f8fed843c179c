// Helpers for the hostile-input suites (test/hostile): the API's operations read from the
// service's own OpenAPI document (so a new route is covered without editing a list), a
// fingerprint of every table (to show that a refused request changed nothing), raw HTTP
// for requests fetch would tidy up, and the strings and values thrown at the service.
import http from 'node:http';
import type { Knex } from 'knex';

export interface JsonSchema {
  type?: string | string[];
  enum?: unknown[];
  anyOf?: JsonSchema[];
  format?: string;
  pattern?: string;
  minLength?: number;
  maxLength?: number;
  minimum?: number;
  maximum?: number;
  exclusiveMinimum?: number;
  exclusiveMaximum?: number;
  properties?: Record<string, JsonSchema>;
  required?: string[];
  items?: JsonSchema;
  default?: unknown;
}

export interface ParamSpec {
  name: string;
  in: 'path' | 'query';
  required: boolean;
  schema: JsonSchema;
}

export interface Operation {
  method: 'get' | 'post' | 'patch' | 'delete';
  /** OpenAPI path relative to /api, e.g. '/alerts/{id}'. */
  path: string;
  /** The ability the route table asks for; undefined for the routes outside the table (auth, health). */
  ability?: string;
  params: ParamSpec[];
  body?: JsonSchema;
}

/** Every operation the service documents, from GET /api/openapi.json. */
export async function operationsOf(url: string): Promise<Operation[]> {
  const doc = (await (await fetch(`${url}/api/openapi.json`)).json()) as {
    paths: Record<string, Record<string, { 'x-whitecap-ability'?: string; parameters?: ParamSpec[]; requestBody?: { content: Record<string, { schema?: JsonSchema }> } }>>;
  };
  const out: Operation[] = [];
  for (const [path, methods] of Object.entries(doc.paths)) {
    for (const [method, op] of Object.entries(methods)) {
      out.push({
        method: method as Operation['method'],
        path,
        ability: op['x-whitecap-ability'],
        params: op.parameters ?? [],
        body: op.requestBody?.content['application/json']?.schema,
      });
    }
  }
  return out;
}

/** '/alerts/{id}' with values for its path parameters (encoded unless `raw`). */
export function fillPath(path: string, values: Record<string, string | number>, raw: readonly string[] = []): string {
  return path.replace(/\{([^}]+)\}/g, (_m, name: string) => {
    const v = values[name];
    if (v === undefined) throw new Error(`no value for {${name}} in ${path}`);
    return raw.includes(name) ? String(v) : encodeURIComponent(String(v));
  });
}

/** The JSON types a schema admits ('integer' counts as 'integer' and not as 'number'). */
export function typesOf(s: JsonSchema): string[] {
  if (s.anyOf) return s.anyOf.flatMap(typesOf);
  if (Array.isArray(s.type)) return s.type;
  if (s.type) return [s.type];
  if (s.enum) return [...new Set(s.enum.map((v) => (v === null ? 'null' : typeof v)))];
  return [];
}

/** Table name → "rows:digest" for every table of the public schema (partitions counted in their parent). */
export async function fingerprint(knex: Knex): Promise<Record<string, string>> {
  const tables = (
    await knex.raw<{ rows: { name: string }[] }>(
      `select c.relname as name from pg_class c join pg_namespace n on n.oid = c.relnamespace
       where n.nspname = 'public' and c.relkind in ('r', 'p') and not c.relispartition order by 1`,
    )
  ).rows.map((r) => r.name);
  const out: Record<string, string> = {};
  for (const name of tables) {
    const { rows } = await knex.raw<{ rows: { n: string; digest: string }[] }>(
      `select count(*) as n, md5(coalesce(string_agg(md5(t::text), ',' order by md5(t::text)), '')) as digest from ?? as t`,
      [name],
    );
    out[name] = `${rows[0].n}:${rows[0].digest}`;
  }
  return out;
}

/** The tables whose fingerprint differs (empty when nothing changed). */
export function changedTables(before: Record<string, string>, after: Record<string, string>): string[] {
  const names = new Set([...Object.keys(before), ...Object.keys(after)]);
  return [...names].filter((n) => before[n] !== after[n]).sort();
}

export interface RawResponse {
  status: number;
  headers: http.IncomingHttpHeaders;
  text: string;
}

/**
 * A request exactly as written: the path is not normalized or re-encoded, the body is sent as
 * given with its length declared. An answer that comes before the body is all sent (a 413,
 * then the connection closed) is still returned.
 */
export function rawRequest(
  url: string,
  opts: { method?: string; path: string; headers?: Record<string, string | number>; body?: string | Buffer; timeoutMs?: number },
): Promise<RawResponse> {
  const u = new URL(url);
  const body = opts.body === undefined ? undefined : Buffer.isBuffer(opts.body) ? opts.body : Buffer.from(opts.body);
  return new Promise((resolve, reject) => {
    let answered = false;
    const req = http.request(
      {
        host: u.hostname,
        port: u.port,
        method: opts.method ?? 'GET',
        path: opts.path,
        headers: { connection: 'close', ...(body ? { 'content-length': body.length } : {}), ...opts.headers },
      },
      (res) => {
        answered = true;
        const chunks: Buffer[] = [];
        res.on('data', (c: Buffer) => chunks.push(c));
        const done = () => resolve({ status: res.statusCode ?? 0, headers: res.headers, text: Buffer.concat(chunks).toString('utf8') });
        res.on('end', done);
        res.on('aborted', done);
        res.on('error', done);
      },
    );
    if (opts.timeoutMs) req.setTimeout(opts.timeoutMs, () => req.destroy(new Error(`no answer within ${opts.timeoutMs} ms`)));
    req.on('error', (err) => {
      // The server may answer and close while the body is still being written: wait a moment for that answer.
      if (!answered) setTimeout(() => (answered ? undefined : reject(err)), 500);
    });
    if (body) req.write(body);
    req.end();
  });
}

/** Strings an attacker puts in a filter, a sort key or a name. None of them matches the demo data. */
export const INJECTION_STRINGS: readonly string[] = [
  "'; drop table users;--",
  '1 or 1=1',
  "' or '1'='1",
  "admin'--",
  '1; select pg_sleep(3)--',
  "') union select password_hash, email from users--",
  '" or ""="',
  '%',
  '_',
  '%\' or 1=1 --',
  '\\',
  '$gt',
  '{"$ne": null}',
  '../../../../etc/passwd',
  '<script>alert(1)</script>',
  'ẞtraße ✓ 🛰️ 漢字 العربية',
  '\u202etxt.exe',
  'a\u0000b',
  'line\r\nSet-Cookie: x=1',
  'x'.repeat(5000),
  "'".repeat(2000),
];

/** Values of the wrong JSON type, or out of range, for a property with schema `s` (JSON text, so that 1e400 can be sent). */
export function wrongValues(s: JsonSchema): { label: string; json: string }[] {
  const types = typesOf(s);
  const isNum = types.includes('number') || types.includes('integer');
  const candidates: { label: string; json: string; type: string }[] = [
    { label: 'a string', json: JSON.stringify('1 or 1=1'), type: 'string' },
    { label: 'a number', json: '12', type: 'number' },
    { label: 'a boolean', json: 'true', type: 'boolean' },
    { label: 'null', json: 'null', type: 'null' },
    { label: 'an array', json: '["x"]', type: 'array' },
    { label: 'an object', json: '{"$gt":""}', type: 'object' },
  ];
  const out = candidates
    .filter((c) => !types.includes(c.type) && !(c.type === 'number' && isNum))
    .map(({ label, json }) => ({ label, json }));
  if (isNum) {
    out.push({ label: 'a number too large for JSON (1e400)', json: '1e400' });
    if (s.maximum !== undefined) out.push({ label: 'above its maximum', json: String(s.maximum + 1) });
    if (s.minimum !== undefined) out.push({ label: 'below its minimum', json: String(s.minimum - 1) });
    if (s.exclusiveMinimum !== undefined) out.push({ label: 'at its exclusive minimum', json: String(s.exclusiveMinimum) });
  }
  if (types.includes('integer')) {
    out.push({ label: 'a fraction', json: '1.5' });
    if (s.maximum === undefined || s.maximum > 2_147_483_647) out.push({ label: 'past a database integer (2^31)', json: '2147483648' });
  }
  if (types.includes('string') && s.maxLength !== undefined) out.push({ label: 'one character too long', json: JSON.stringify('x'.repeat(s.maxLength + 1)) });
  if (types.includes('string') && s.enum) out.push({ label: 'not one of its values', json: JSON.stringify("' or 1=1 --") });
  if (types.includes('array') && s.items) out.push({ label: 'an array of the wrong items', json: '[{"$gt":""}]' });
  // Ten thousand nested arrays: a validator or checker that recurses must not fall over.
  out.push({ label: 'deeply nested arrays', json: '['.repeat(10_000) + ']'.repeat(10_000) });
  return out;
}

/** Bodies that are not JSON at all, or not an object or array (the parser is strict). */
export const MALFORMED_JSON: readonly { label: string; body: string | Buffer }[] = [
  { label: 'an unclosed object', body: '{' },
  { label: 'a cut-off value', body: '{"note": "a' },
  { label: 'single quotes', body: "{'note': 'x'}" },
  { label: 'a trailing brace', body: '{"note": "x"}}' },
  { label: 'a trailing comma', body: '{"note": "x",}' },
  { label: 'a leading zero', body: '{"n": 01}' },
  { label: 'a comment', body: '{"note": "x" /* hi */}' },
  { label: 'a bare word', body: 'nul' },
  { label: 'a bare string', body: '"just a string"' },
  { label: 'a bare number', body: '42' },
  { label: 'a bare null', body: 'null' },
  { label: 'bytes that are not UTF-8', body: Buffer.from([0x7b, 0xff, 0xfe, 0x7d]) },
  { label: 'an SQL statement', body: "'; drop table users;--" },
  { label: 'form data', body: 'email=admin%40saltmarsh.example&password=x' },
];

/** Ids of real rows for path parameters and bodies, made by `prepareTargets`. */
export interface Targets {
  estimators: number;
  alerts: number;
  units: number;
  users: number;
  rotas: number;
  override: number;
  webhooks: number;
  deliveries: number;
  studies: number;
  designs: number;
  revision: number;
  thermalRevision: number;
  [resource: string]: number;
}

const isoFromNow = (ms: number) => new Date(Date.now() + ms).toISOString();

/**
 * Rows for the hostile cases to aim at, in a seeded database: an open alert, a quarantined
 * payload, a webhook endpoint and a watch override (made through the API as an admin), so
 * that a request which got past a check would act on something real.
 */
export async function prepareTargets(knex: Knex, url: string, adminToken: string): Promise<Targets> {
  const post = async (path: string, body: unknown) => {
    const res = await fetch(`${url}/api${path}`, {
      method: 'POST',
      headers: { authorization: `Bearer ${adminToken}`, 'content-type': 'application/json' },
      body: JSON.stringify(body),
    });
    if (res.status !== 201) throw new Error(`POST ${path} answered ${res.status}: ${await res.text()}`);
    return (await res.json()) as { id: number };
  };
  const estimator = await knex('estimators as e').join('units as u', 'u.id', 'e.unit_id').where('u.key', 'cabinet-04').first('e.id', 'e.unit_id');
  const [alert] = await knex('alerts')
    .insert({
      estimator_id: estimator.id,
      unit_id: estimator.unit_id,
      rule: 'nis-window',
      severity: 'warning',
      summary: 'NIS window above its band',
      evidence: JSON.stringify({ check: 'nis-window' }),
      opened_at: new Date(),
      last_evidence_at: new Date(),
    })
    .returning('id');
  await knex('quarantine').insert({
    unit_key: 'cabinet-04',
    estimator_key: 'thermal',
    topic: 'whitecap/v1/cabinet-04/thermal',
    reason_code: 'not_json',
    reason: 'not JSON',
    payload: Buffer.from('nope'),
    payload_bytes: 4,
  });
  const viewer = await knex('users').where({ email: 'viewer@saltmarsh.example' }).first('id');
  const rota = await knex('watch_rotas').orderBy('id').first('id');
  const webhook = await post('/webhooks', { url: 'https://hooks.example/whitecap', description: 'hostile suite' });
  await post(`/rotas/${rota.id}/overrides`, { from: isoFromNow(3_600_000), to: isoFromNow(7_200_000), userId: viewer.id });
  const design = await knex('designs').where({ key: 'tractor-position' }).first('id');
  const thermal = await knex('design_revisions as r').join('designs as d', 'd.id', 'r.design_id').where('d.key', 'cabinet-thermal').first('r.id');
  return {
    estimators: Number(estimator.id),
    alerts: Number(alert.id),
    units: Number(estimator.unit_id),
    users: Number(viewer.id),
    rotas: Number(rota.id),
    override: Number((await knex('watch_overrides').orderBy('id').first('id')).id),
    webhooks: Number(webhook.id),
    deliveries: 1,
    studies: 1,
    designs: Number(design.id),
    revision: Number((await knex('design_revisions').where({ design_id: design.id }).orderBy('revision').first('id')).id),
    thermalRevision: Number(thermal.id),
  };
}

/** A valid body for every operation that takes one (keyed 'method /path'): each hostile case breaks one thing in it. */
export function validBodies(t: Targets): Record<string, Record<string, unknown>> {
  const shift = { weekday: 1, handover: '08:00', userId: t.users };
  const window = { from: isoFromNow(-3_600_000), to: isoFromNow(0) };
  return {
    'post /alerts/{id}/acknowledge': { note: 'checked the cable' },
    'post /alerts/{id}/notes': { text: 'swapped the sensor' },
    'post /alerts/{id}/resolve': { note: 'fixed' },
    'post /designs': { key: 'hostile-design', name: 'Hostile design', description: 'made by the hostile suite' },
    'post /users': { email: 'new.person@saltmarsh.example', displayName: 'New Person', role: 'viewer', password: 'tide-gauge-47-north' },
    'patch /users/{id}': { displayName: 'Renamed', role: 'responder', active: true },
    'post /rotas': { name: 'Night watch', siteId: null, timeZone: 'UTC', shifts: [shift], backups: [] },
    'patch /rotas/{id}': { name: 'Night watch', siteId: null, timeZone: 'UTC', shifts: [shift], backups: [] },
    'post /rotas/{id}/overrides': { from: isoFromNow(86_400_000), to: isoFromNow(90_000_000), userId: t.users, note: 'swap' },
    'patch /notification-rules/{severity}': { pages: false, handoffAfterMinutes: 30, quietFrom: '22:00', quietTo: '06:00' },
    'post /webhooks': { url: 'https://hooks.example/other', description: 'another' },
    'patch /webhooks/{id}': { active: false, description: 'paused' },
    'post /studies': {
      estimatorIds: [t.estimators],
      ...window,
      lags: 10,
      estimateQ: 'diagonal',
      estimateR: 'diagonal',
      regulatorK: [[1]],
      marginFloor: { gainDb: 6 },
      title: 'study',
      designRevisionId: t.thermalRevision,
      uploadIds: [1],
    },
    'post /designs/{id}/revisions': { model: { A: [[0.98]], C: [[1]], G: [[1]], Q: [[0.01]], R: [[0.04]] }, notes: 'retuned', status: 'draft' },
    'patch /designs/{id}/revisions/{revisionId}': { status: 'retired' },
    'post /auth/sign-in': { email: 'admin@saltmarsh.example', password: 'saltmarsh-admin' },
    'post /auth/password': { currentPassword: 'saltmarsh-admin', newPassword: 'another-long-password' },
  };
}

/** Real ids for an operation's path parameters. */
export function pathValues(op: Operation, t: Targets): Record<string, string | number> {
  const resource = op.path.split('/')[1];
  const out: Record<string, string | number> = {};
  for (const p of op.params.filter((x) => x.in === 'path')) {
    if (p.name === 'severity') out[p.name] = 'warning';
    else if (p.name === 'revisionId') out[p.name] = t.revision;
    else if (p.name === 'overrideId') out[p.name] = t.override;
    else out[p.name] = t[resource] ?? 1;
  }
  return out;
}

/** An operation's required query parameters with valid values. */
export function queryBaseline(op: Operation, t: Targets): Record<string, string> {
  const out: Record<string, string> = {};
  for (const p of op.params.filter((x) => x.in === 'query' && x.required)) {
    if (p.name === 'from') out.from = isoFromNow(-3_600_000);
    else if (p.name === 'to') out.to = isoFromNow(0);
    else if (p.name === 'estimatorIds') out.estimatorIds = String(t.estimators);
    else if (p.name === 'designRevisionId') out.designRevisionId = String(t.thermalRevision);
    else if (p.name === 'name') out.name = 'a logged run';
    else if (p.schema.enum) out[p.name] = String(p.schema.enum[0]);
    else out[p.name] = '1';
  }
  return out;
}

/** What is wrong with an answer that should be a 4xx problem+json (null when it is right). */
export function problemFault(c: { label: string; res: RawResponse; expect?: number[]; names?: string }): string | null {
  const { status, headers, text } = c.res;
  const allowed = c.expect ?? [];
  if (allowed.length ? !allowed.includes(status) : !(status >= 400 && status < 500)) return `${c.label}: answered ${status} ${text.slice(0, 200)}`;
  if (!String(headers['content-type'] ?? '').startsWith('application/problem+json')) return `${c.label}: ${status} with content-type ${headers['content-type']}`;
  let body: { status?: number; type?: string; title?: string; errors?: { path: string }[] };
  try {
    body = JSON.parse(text);
  } catch {
    return `${c.label}: body is not JSON: ${text.slice(0, 100)}`;
  }
  if (body.status !== status || typeof body.type !== 'string' || typeof body.title !== 'string') return `${c.label}: not a problem document: ${text.slice(0, 200)}`;
  if (c.names && status === 400 && body.errors && !body.errors.some((e) => e.path === c.names || e.path.startsWith(`${c.names}.`))) {
    return `${c.label}: the problem names ${body.errors.map((e) => e.path).join(', ')}, not ${c.names}`;
  }
  return null;
}

/** Runs jobs a few at a time (the service is one process; a little concurrency keeps the suites short). */
export async function inPool<T>(jobs: (() => Promise<T>)[], width = 4): Promise<T[]> {
  const out: T[] = new Array(jobs.length);
  let next = 0;
  await Promise.all(
    Array.from({ length: width }, async () => {
      while (next < jobs.length) {
        const i = next++;
        out[i] = await jobs[i]();
      }
    }),
  );
  return out;
}

/**
 * The soak benchmark: the demo at its design load for minutes on end, with people
 * watching it.
 *
 *   npm run bench:soak                   10,000 estimators at 1 sample/s for 10 minutes, 50 dashboard users
 *   npm run bench:soak -- --quick        the same fleet for 2 min with 10 users (a smoke run)
 *   npm run bench:soak -- --minutes 30
 *   npm run bench:soak -- --help
 *
 * The load. 10,000 synthetic tractors, each with one position estimator (a real Kalman
 * filter, the simulator's PlantFilter) producing 1 sample/s, each on its own MQTT
 * connection with its own device credential, QoS 1. A field unit on a cellular link
 * does not send a message a second: it buffers and sends a batch every 5 s (the batch
 * form, 5 samples a message), so the service takes 2,000 messages/s carrying 10,000
 * samples/s. (One message per sample would be 10,000 messages/s, which at bench:ingest's
 * cost per message does not fit on a 2-core machine beside PostgreSQL; nor is it how
 * units on a metered link talk.) The units' 5-s cycles are spread over the 5 s, as a
 * real fleet's are (each of the 5 publisher processes starts its units 1 s after the
 * previous one, and within a process the units are spread over the second), so
 * messages arrive at an even 2,000/s instead of in bursts.
 *
 * The people. 50 dashboard users (viewer accounts made for the run), each signed in
 * through POST /api/auth/sign-in, holding the live stream (GET /api/events, server-sent
 * events, as the dashboard's LiveEvents does with fetch) open for the whole run, and
 * polling the fleet screen's table request exactly as the dashboard sends it
 * (GET /api/fleet?sort=verdict&order=desc&limit=25&offset=0) every 5 s, and its heatmap
 * (GET /api/fleet/heatmap, the last hour in 60 buckets) every 60 s. (The dashboard
 * itself refetches the table on a live change, gathered for 1.5 s, and at least every
 * 30 s; a fixed 5 s keeps the load the same from run to run; --poll dashboard does
 * as the screen does.) The users run in their
 * own process (this file, forked with --as-dashboard-users) so their timings do not
 * wait on the benchmark's sampling.
 *
 * A fault. Noise ×3 on 5 estimators from a known time (30 % into the run): the time
 * to the alert as the database records it (opened_at) and as the users see it (the
 * first and the last of them to receive the alert on their live stream).
 *
 * The stack is bench:ingest's (bench-stack.ts): a throwaway PostgreSQL cluster with
 * production durability, migrated and seeded; the real service as a child process;
 * everything stopped and the cluster removed at the end, on Ctrl-C or on an error.
 * It prints the figures and writes ingest/bench/results/soak-latest.{json,md}.
 */
import { fork, type ChildProcess } from 'node:child_process';
import { randomBytes } from 'node:crypto';
import fs from 'node:fs';
import http from 'node:http';
import os from 'node:os';
import path from 'node:path';
import bcrypt from 'bcryptjs';
import pg from 'pg';
import { syntheticTractors } from '../../simulators/src/saltmarsh-fleet';
import { benchSecretFor, type ToWorker, type WorkerCounts } from './bench-fleet';
import {
  CHECK_RULES,
  MB,
  benchPostgresSettings,
  cleanupNow,
  countLogMessages,
  countStoredOfAcknowledged,
  fmtInt,
  forkPublishers,
  sumWorkerCounts,
  fmtMs,
  gitCommit,
  installCleanup,
  log,
  metric,
  postmasterPidOf,
  provisionSyntheticTractors,
  root,
  round,
  sleep,
  stack,
  startBenchPostgres,
  startBenchService,
  stopBenchPostgres,
  waitForExit,
  numberOption as num,
  resultsName,
} from './bench-stack';
import { LatencyHistogram, type HistogramData } from './latency-histogram';
import { LiveHeapProbe, type LiveHeap } from './live-heap-probe';
import { freePort } from '../../scripts/lib/postgres.mjs';
import { machineCpuSeconds, rssBytes, treeCpuSeconds } from './proc-sampler';

const resultsDir = path.join(__dirname, 'results');
/** The fleet screen's table request with the dashboard's defaults (fleet-query.ts: DEFAULT_FLEET_QUERY, fleetParams). */
const FLEET_PATH = '/api/fleet?sort=verdict&order=desc&limit=25&offset=0';
const USERS_FLAG = '--as-dashboard-users';

// ---------------------------------------------------------------- options

interface Options {
  durationS: number;
  quick: boolean;
  units: number;
  /** Samples per second per estimator. */
  rate: number;
  /** Seconds of samples a unit gathers into one message. */
  batchS: number;
  publishers: number;
  users: number;
  pollS: number;
  /** Refetch as the dashboard's fleet screen does: on live changes and every 30 s. */
  dashboardPoll: boolean;
  heatmapS: number;
  warmupS: number;
  rowS: number;
  faultUnits: number;
  faultFactor: number;
  faultAtS: number | null;
  serviceEnv: Record<string, string>;
  liveHeapS: number;
  write: boolean;
  name: string;
}

const HELP = `npm run bench:soak -- [options]

  --minutes M         minutes of load (default 10)
  --quick             a smoke run: 2 min, 10 users, warm-up 60 s, fault at +60 s, a row every 15 s
  --units N           synthetic tractors, one estimator and one MQTT connection each (default 10000)
  --rate R            samples per second per estimator (default 1)
  --batch-seconds S   seconds of samples a unit sends in one message (default 5)
  --publishers N      publisher processes; each starts its units S/N s after the previous one,
                      spreading the units' cycles evenly (default 5)
  --users N           dashboard users (default 50; 10 with --quick)
  --poll S            seconds between a user's fleet-table requests (default 5)
  --poll dashboard    as the dashboard's fleet screen: the table on every live change (gathered
                      for 1.5 s) and every 30 s, the heatmap on a verdict change (10 s) and every 60 s
  --heatmap S         seconds between a user's heatmap requests (default 60; 0 = none)
  --warmup S          seconds left out of the sustained rate and the memory slope (default 120;
                      60 with --quick): 10,000 estimators appearing at once take the service a while
  --row S             seconds per row of the table over time (default 60; 15 with --quick)
  --fault-units N     estimators whose measurement noise grows (default 5)
  --fault-factor F    noise standard deviation ×F (default 3)
  --fault-at S        seconds into the run the fault starts (default 30 % of the run; 60 with --quick)
  --service-env K=V   an extra environment variable for the service (repeatable)
  --live-heap S       also force a full garbage collection through the service's inspector every
                      S seconds and read what is left (default 0 = never). Each stops the service
                      for 1-3 s at this load and can tip it into falling behind; the service's own
                      reading after its natural full collections is taken in every run.
  --name NAME         write ingest/bench/results/soak-NAME.{json,md} (default: latest)
  --no-write          do not write the results files
`;

function parseOptions(argv: string[]): Options {
  const o: Options = {
    durationS: 600,
    quick: false,
    units: 10_000,
    rate: 1,
    batchS: 5,
    publishers: 5,
    users: 50,
    pollS: 5,
    dashboardPoll: false,
    heatmapS: 60,
    warmupS: 120,
    rowS: 60,
    faultUnits: 5,
    faultFactor: 3,
    faultAtS: null,
    serviceEnv: {},
    liveHeapS: 0,
    write: true,
    name: 'latest',
  };
  const given = new Set<string>();
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i];
    const next = () => argv[++i];
    given.add(a);
    switch (a) {
      case '--help':
      case '-h':
        console.log(HELP);
        process.exit(0);
        break;
      case '--minutes':
        o.durationS = Math.round(num(a, next(), 0.5) * 60);
        break;
      case '--quick':
        o.quick = true;
        break;
      case '--units':
        o.units = Math.round(num(a, next(), 1));
        break;
      case '--rate':
        o.rate = num(a, next(), 0.01);
        break;
      case '--batch-seconds':
        o.batchS = num(a, next(), 0.01);
        break;
      case '--publishers':
        o.publishers = Math.round(num(a, next(), 1));
        break;
      case '--users':
        o.users = Math.round(num(a, next(), 0));
        break;
      case '--poll': {
        const v = next();
        if (v === 'dashboard') {
          o.dashboardPoll = true;
          o.pollS = 30;
        } else o.pollS = num(a, v, 0.1);
        break;
      }
      case '--heatmap':
        o.heatmapS = num(a, next(), 0);
        break;
      case '--warmup':
        o.warmupS = num(a, next(), 0);
        break;
      case '--row':
        o.rowS = num(a, next(), 1);
        break;
      case '--live-heap':
        o.liveHeapS = num(a, next(), 0);
        break;
      case '--fault-units':
        o.faultUnits = Math.round(num(a, next(), 0));
        break;
      case '--fault-factor':
        o.faultFactor = num(a, next(), 0);
        break;
      case '--fault-at':
        o.faultAtS = num(a, next(), 0);
        break;
      case '--service-env': {
        const v = next();
        const m = v ? /^([A-Za-z_][A-Za-z0-9_]*)=(.*)$/.exec(v) : null;
        if (!m) throw new Error(`--service-env needs KEY=VALUE, got ${v}`);
        o.serviceEnv[m[1]] = m[2];
        break;
      }
      case '--name':
        o.name = resultsName(next());
        break;
      case '--no-write':
        o.write = false;
        break;
      default:
        throw new Error(`unknown option ${a} (see --help)`);
    }
  }
  if (o.quick) {
    if (!given.has('--minutes')) o.durationS = 120;
    if (!given.has('--users')) o.users = 10;
    if (!given.has('--warmup')) o.warmupS = 60;
    if (!given.has('--row')) o.rowS = 15;
    if (!given.has('--fault-at')) o.faultAtS = 60;
  }
  if (o.warmupS >= o.durationS) throw new Error('--warmup must be shorter than the run');
  const batch = Math.round(o.batchS * o.rate);
  if (batch < 1 || batch > 1000) throw new Error(`--batch-seconds × --rate must give 1 to 1000 samples a message, got ${batch}`);
  o.publishers = Math.min(o.publishers, o.units);
  o.faultUnits = Math.min(o.faultUnits, o.units);
  return o;
}

// ---------------------------------------------------------------- the dashboard users (a child process)

interface UsersConfig {
  baseUrl: string;
  users: { email: string; password: string }[];
  /** The fleet table every pollMs. */
  pollMs: number;
  /** 0: no heatmap requests. */
  heatmapMs: number;
  /** Also refetch on live events, as the dashboard's fleet screen does (null: on the timer only). */
  dashboardRefresh: { fleetAuditMs: number; heatmapAuditMs: number } | null;
}

type ToUsers = { type: 'config'; config: UsersConfig } | { type: 'go'; startAtMs: number } | { type: 'stop' };

interface StreamCounts {
  verdict: number;
  alert: number;
  /** Comments: ": connected" and ": keep-alive". */
  comments: number;
  other: number;
  /** Streams that ended or failed while the user still wanted them. */
  disconnects: number;
  /** Connection attempts after the first. */
  reconnects: number;
  /** Attempts that did not answer 200 with an event stream. */
  refused: number;
}

interface AlertSeen {
  estimatorId: number | null;
  rule: string;
  at: string;
  firstMs: number;
  lastMs: number;
  users: number;
}

type FromUsers =
  | { type: 'ready'; signInMs: number[]; streamsOpen: number; ms: number }
  | {
      type: 'progress';
      atMs: number;
      /** Request times (ms) completed since the last report. */
      fleetMs: number[];
      heatmapMs: number[];
      fleetErrors: number;
      heatmapErrors: number;
      streamsOpen: number;
      stream: StreamCounts;
      refreshes: number;
    }
  | {
      type: 'done';
      stream: StreamCounts;
      streamsOpen: number;
      /** Received minus the event's own time, for verdict and alert events. */
      eventLag: HistogramData;
      alertOpens: AlertSeen[];
      errorKinds: Record<string, number>;
      refreshes: number;
    }
  | { type: 'error'; message: string };

interface HttpAnswer {
  status: number;
  text: string;
  headers: http.IncomingHttpHeaders;
}

function runDashboardUsers(): void {
  const send = (m: FromUsers) => process.send?.(m);
  let config: UsersConfig;
  let stopping = false;
  /** From 'go' on: the requests run. */
  let polling = false;
  const counts: StreamCounts = { verdict: 0, alert: 0, comments: 0, other: 0, disconnects: 0, reconnects: 0, refused: 0 };
  const eventLag = new LatencyHistogram();
  const alertOpens = new Map<string, AlertSeen & { seenBy: Set<number> }>();
  const errorKinds = new Map<string, number>();
  const noteError = (what: string) => errorKinds.set(what, (errorKinds.get(what) ?? 0) + 1);
  let fleetMs: number[] = [];
  let heatmapMs: number[] = [];
  let fleetErrors = 0;
  let heatmapErrors = 0;
  let refreshes = 0;
  const timers = new Set<NodeJS.Timeout>();
  const later = (ms: number, fn: () => void) => {
    const t = setTimeout(() => {
      timers.delete(t);
      if (!stopping) fn();
    }, Math.max(0, ms));
    timers.add(t);
  };

  interface User {
    index: number;
    email: string;
    password: string;
    token: string;
    cookie: string;
    /** One browser: up to 6 connections to the origin, kept alive. */
    agent: http.Agent;
    stream: http.ClientRequest | null;
    streamOpen: boolean;
    everOpened: boolean;
    refresh: Record<'fleet' | 'heatmap', { inFlight: boolean; pending: boolean; audit: boolean }>;
  }
  let users: User[] = [];

  const request = (u: User, method: string, p: string, headers: Record<string, string>, body?: string, retried = false): Promise<HttpAnswer> =>
    new Promise((resolve, reject) => {
      const req = http.request(`${config.baseUrl}${p}`, { method, agent: u.agent, headers }, (res) => {
        const chunks: Buffer[] = [];
        res.on('data', (c: Buffer) => chunks.push(c));
        res.on('end', () => resolve({ status: res.statusCode ?? 0, text: Buffer.concat(chunks).toString('utf8'), headers: res.headers }));
        res.on('error', reject);
      });
      req.setTimeout(60_000, () => req.destroy(new Error('no answer within 60 s')));
      req.on('error', (err: NodeJS.ErrnoException) => {
        // A kept-alive connection the service closed as the request left: send it again on a
        // new one, as a browser does (Node's documented pattern, request.reusedSocket).
        if (!retried && req.reusedSocket && err.code === 'ECONNRESET') request(u, method, p, headers, body, true).then(resolve, reject);
        else reject(err);
      });
      req.end(body);
    });

  const takeSession = (u: User, res: HttpAnswer) => {
    const body = JSON.parse(res.text) as { accessToken: string; expiresIn: number };
    u.token = body.accessToken;
    const setCookie = res.headers['set-cookie']?.find((c) => c.startsWith('wc_refresh='));
    if (setCookie) u.cookie = setCookie.split(';')[0];
    // As the dashboard's Session does: refresh a minute before the token runs out (or at 80 % of a short lifetime).
    later(Math.max(5, Math.min(body.expiresIn - 60, body.expiresIn * 0.8)) * 1000, () => void refresh(u));
  };

  const refresh = async (u: User): Promise<void> => {
    try {
      const res = await request(u, 'POST', '/api/auth/refresh', { cookie: u.cookie, 'x-whitecap-csrf': '1' });
      if (res.status !== 200) throw new Error(`refresh answered ${res.status}`);
      refreshes += 1;
      takeSession(u, res);
    } catch (err) {
      noteError(`refresh: ${(err as Error).message}`);
    }
  };

  const signIn = async (u: User): Promise<number> => {
    const began = performance.now();
    const res = await request(u, 'POST', '/api/auth/sign-in', { 'content-type': 'application/json' }, JSON.stringify({ email: u.email, password: u.password }));
    if (res.status !== 200) throw new Error(`sign-in as ${u.email} answered ${res.status}: ${res.text.slice(0, 300)}`);
    takeSession(u, res);
    return performance.now() - began;
  };

  const onBlock = (u: User, block: string) => {
    let event = 'message';
    const data: string[] = [];
    let comment = false;
    for (const line of block.split('\n')) {
      if (line.startsWith(':')) comment = true;
      else if (line.startsWith('event:')) event = line.slice(6).trim();
      else if (line.startsWith('data:')) data.push(line.slice(5).replace(/^ /, ''));
    }
    if (data.length === 0) {
      if (comment) counts.comments += 1;
      return;
    }
    const now = Date.now();
    let parsed: { at?: string; kind?: string; estimatorId?: number | null; rule?: string } = {};
    try {
      parsed = JSON.parse(data.join('\n'));
    } catch {
      noteError(`stream: unreadable ${event} data`);
    }
    if (parsed.at) eventLag.record(Math.max(0, now - Date.parse(parsed.at)));
    if (config.dashboardRefresh && (event === 'verdict' || event === 'alert')) {
      // The fleet screen refetches its table on any live change (gathered for 1.5 s) and its heatmap on a verdict change (10 s).
      audit(u, 'fleet', config.dashboardRefresh.fleetAuditMs);
      if (event === 'verdict' && config.heatmapMs > 0) audit(u, 'heatmap', config.dashboardRefresh.heatmapAuditMs);
    }
    if (event === 'verdict') counts.verdict += 1;
    else if (event === 'alert') {
      counts.alert += 1;
      if (parsed.kind === 'open' && parsed.rule && parsed.at) {
        const key = `${parsed.estimatorId ?? 'unit'}|${parsed.rule}|${parsed.at}`;
        let seen = alertOpens.get(key);
        if (!seen) {
          seen = { estimatorId: parsed.estimatorId ?? null, rule: parsed.rule, at: parsed.at, firstMs: now, lastMs: now, users: 0, seenBy: new Set() };
          alertOpens.set(key, seen);
        }
        if (!seen.seenBy.has(u.index)) {
          seen.seenBy.add(u.index);
          seen.lastMs = now;
        }
      }
    } else counts.other += 1;
  };

  /** Opens the user's live stream; resolves when it answers (open or not). Reconnects 1 s after it ends, as long as we run. */
  const openStream = (u: User): Promise<void> =>
    new Promise((resolve) => {
      if (u.everOpened) counts.reconnects += 1;
      u.everOpened = true;
      let settled = false;
      let finished = false;
      const settle = () => {
        if (!settled) {
          settled = true;
          resolve();
        }
      };
      const ended = (why: string) => {
        if (finished) return;
        finished = true;
        if (u.streamOpen) {
          u.streamOpen = false;
          if (!stopping) {
            counts.disconnects += 1;
            noteError(`stream: ${why}`);
          }
        }
        u.stream = null;
        settle();
        if (!stopping) later(1000, () => void openStream(u));
      };
      // Its own connection, as a browser's fetch stream holds one.
      const req = http.get(`${config.baseUrl}/api/events`, { agent: false, headers: { authorization: `Bearer ${u.token}`, accept: 'text/event-stream' } }, (res) => {
        if (res.statusCode !== 200) {
          counts.refused += 1;
          noteError(`stream: answered ${res.statusCode}`);
          res.resume();
          res.on('end', () => ended(`answered ${res.statusCode}`));
          if (res.statusCode === 401) void refresh(u);
          return;
        }
        u.streamOpen = true;
        settle();
        res.setEncoding('utf8');
        let buf = '';
        res.on('data', (chunk: string) => {
          buf += chunk;
          let i: number;
          while ((i = buf.indexOf('\n\n')) >= 0) {
            const block = buf.slice(0, i);
            buf = buf.slice(i + 2);
            onBlock(u, block);
          }
        });
        res.on('end', () => ended('the service ended it'));
        res.on('error', (err) => ended(err.message));
        res.on('close', () => ended('closed'));
      });
      req.on('error', (err) => ended(err.message));
      u.stream = req;
    });

  const fetchFleet = async (u: User): Promise<void> => {
    const began = performance.now();
    try {
      let res = await request(u, 'GET', FLEET_PATH, { authorization: `Bearer ${u.token}`, accept: 'application/json' });
      if (res.status === 401) {
        await refresh(u);
        res = await request(u, 'GET', FLEET_PATH, { authorization: `Bearer ${u.token}`, accept: 'application/json' });
      }
      if (res.status !== 200) throw new Error(`answered ${res.status}`);
      JSON.parse(res.text); // as the browser does
      fleetMs.push(performance.now() - began);
    } catch (err) {
      fleetErrors += 1;
      noteError(`fleet: ${(err as Error).message}`);
    }
  };

  const fetchHeatmap = async (u: User): Promise<void> => {
    const began = performance.now();
    const to = new Date();
    const from = new Date(to.getTime() - 3_600_000);
    const p = `/api/fleet/heatmap?from=${encodeURIComponent(from.toISOString())}&to=${encodeURIComponent(to.toISOString())}&buckets=60`;
    try {
      const res = await request(u, 'GET', p, { authorization: `Bearer ${u.token}`, accept: 'application/json' });
      if (res.status !== 200) throw new Error(`answered ${res.status}`);
      JSON.parse(res.text);
      heatmapMs.push(performance.now() - began);
    } catch (err) {
      heatmapErrors += 1;
      noteError(`heatmap: ${(err as Error).message}`);
    }
  };

  /** Fetches now, or right after the request in flight (one at a time per user and kind). */
  const trigger = (u: User, what: 'fleet' | 'heatmap') => {
    const st = u.refresh[what];
    if (st.inFlight) {
      st.pending = true;
      return;
    }
    st.inFlight = true;
    void (what === 'fleet' ? fetchFleet(u) : fetchHeatmap(u)).finally(() => {
      st.inFlight = false;
      if (st.pending && !stopping) {
        st.pending = false;
        trigger(u, what);
      }
    });
  };

  /** Triggers at firstAtMs and every periodMs after it. */
  const every = (u: User, what: 'fleet' | 'heatmap', firstAtMs: number, periodMs: number) => {
    const at = (due: number) =>
      later(due - Date.now(), () => {
        trigger(u, what);
        at(due + periodMs);
      });
    at(firstAtMs);
  };

  /** As rxjs auditTime: the first live event starts a timer; when it ends, one fetch. */
  const audit = (u: User, what: 'fleet' | 'heatmap', ms: number) => {
    const st = u.refresh[what];
    if (!polling || st.audit) return;
    st.audit = true;
    later(ms, () => {
      st.audit = false;
      trigger(u, what);
    });
  };

  const streamsOpen = () => users.filter((u) => u.streamOpen).length;
  let progressTimer: NodeJS.Timeout | null = null;
  const progress = () => {
    send({ type: 'progress', atMs: Date.now(), fleetMs, heatmapMs, fleetErrors, heatmapErrors, streamsOpen: streamsOpen(), stream: { ...counts }, refreshes });
    fleetMs = [];
    heatmapMs = [];
  };

  const start = async (c: UsersConfig) => {
    config = c;
    const began = performance.now();
    users = c.users.map((x, index) => ({
      index,
      email: x.email,
      password: x.password,
      token: '',
      cookie: '',
      agent: new http.Agent({ keepAlive: true, maxSockets: 6 }),
      stream: null,
      streamOpen: false,
      everOpened: false,
      refresh: { fleet: { inFlight: false, pending: false, audit: false }, heatmap: { inFlight: false, pending: false, audit: false } },
    }));
    // Signing in is a bcrypt comparison on the service: a few at a time, as people arrive.
    const signInMs: number[] = [];
    let next = 0;
    await Promise.all(
      Array.from({ length: Math.min(4, users.length) }, async () => {
        while (next < users.length) {
          const u = users[next++];
          signInMs.push(await signIn(u));
          await openStream(u);
        }
      }),
    );
    send({ type: 'ready', signInMs, streamsOpen: streamsOpen(), ms: performance.now() - began });
  };

  const go = (startAtMs: number) => {
    const n = Math.max(1, users.length);
    polling = true;
    users.forEach((u, i) => {
      // Each user at its own point of the cycle (as people open the screen at different times).
      every(u, 'fleet', startAtMs + (i / n) * config.pollMs, config.pollMs);
      if (config.heatmapMs > 0) every(u, 'heatmap', startAtMs + ((i + 0.5) / n) * config.heatmapMs, config.heatmapMs);
    });
    progressTimer = setInterval(progress, 1000);
  };

  const stop = () => {
    const open = streamsOpen();
    stopping = true;
    for (const t of timers) clearTimeout(t);
    if (progressTimer) clearInterval(progressTimer);
    progress();
    for (const u of users) {
      u.stream?.destroy();
      u.agent.destroy();
    }
    send({
      type: 'done',
      stream: { ...counts },
      streamsOpen: open,
      eventLag: eventLag.toJSON(),
      alertOpens: [...alertOpens.values()].map(({ seenBy, ...a }) => ({ ...a, users: seenBy.size })),
      errorKinds: Object.fromEntries(errorKinds),
      refreshes,
    });
    setTimeout(() => process.exit(0), 200);
  };

  process.on('message', (m: ToUsers) => {
    if (m.type === 'config')
      start(m.config).catch((err: Error) => {
        send({ type: 'error', message: err.message });
        process.exit(1);
      });
    else if (m.type === 'go') go(m.startAtMs);
    else if (m.type === 'stop') stop();
  });
  // The benchmark is gone (Ctrl-C, crash): do not outlive it.
  process.on('disconnect', () => process.exit(0));
}

// ---------------------------------------------------------------- the run

interface Second {
  tS: number;
  ackedSamples: number;
  publishedSamples: number;
  ackedMessages: number;
  serviceRssMB: number | null;
  serviceCpuPct: number | null;
  postgresCpuPct: number | null;
  publishersCpuPct: number | null;
  usersCpuPct: number | null;
  machineBusyPct: number | null;
  /** Machine busy minus the service, PostgreSQL, the publishers, the users and this benchmark. */
  otherPct: number | null;
  pubackP99Ms: number | null;
  streamsOpen: number;
  streamEvents: number;
}

interface Probe {
  tS: number;
  heapUsedMB: number;
  /** The old generation after the service's last full collection (null before the first). */
  oldAfterFullGcMB: number | null;
  externalMB: number;
  writeQueue: number;
  loopDelayP99Ms: number;
}

interface Row {
  fromS: number;
  toS: number;
  ackedSamplesPerS: number | null;
  offeredSamplesPerS: number | null;
  pubackP99MaxMs: number | null;
  fleetRequests: number;
  fleetP50Ms: number | null;
  fleetP95Ms: number | null;
  fleetP99Ms: number | null;
  fleetErrors: number;
  heatmapRequests: number;
  heatmapP95Ms: number | null;
  streamEvents: number;
  streamsOpenMin: number;
  serviceRssMB: number | null;
  serviceRssMinMB: number | null;
  serviceRssMaxMB: number | null;
  serviceHeapUsedMB: number | null;
  serviceKeptMB: number | null;
  serviceCpuPct: number | null;
  postgresCpuPct: number | null;
  publishersCpuPct: number | null;
  usersCpuPct: number | null;
  otherPct: number | null;
}

/** Least-squares slope of y on x, with its standard error; y per unit of x. */
function fitSlope(points: { x: number; y: number }[]): { slope: number; se: number; n: number } | null {
  const n = points.length;
  if (n < 3) return null;
  const mx = points.reduce((a, p) => a + p.x, 0) / n;
  const my = points.reduce((a, p) => a + p.y, 0) / n;
  const sxx = points.reduce((a, p) => a + (p.x - mx) ** 2, 0);
  if (sxx === 0) return null;
  const slope = points.reduce((a, p) => a + (p.x - mx) * (p.y - my), 0) / sxx;
  const rss = points.reduce((a, p) => a + (p.y - my - slope * (p.x - mx)) ** 2, 0);
  return { slope, se: Math.sqrt(rss / (n - 2) / sxx), n };
}

/**
 * The lowest value in each window of `windowS` seconds, at the window's mean time. A
 * garbage-collected heap saws up and down by hundreds of MB; its floor (what is left
 * after a collection) is what grows when something is kept that should not be.
 */
function windowFloors(points: { x: number; y: number }[], windowS: number): { x: number; y: number }[] {
  const groups = new Map<number, { xs: number; n: number; min: number }>();
  for (const p of points) {
    const k = Math.floor(p.x / windowS);
    const g = groups.get(k) ?? { xs: 0, n: 0, min: Infinity };
    g.xs += p.x;
    g.n += 1;
    g.min = Math.min(g.min, p.y);
    groups.set(k, g);
  }
  return [...groups.values()].map((g) => ({ x: g.xs / g.n, y: g.min }));
}

const TREND_WINDOW_S = 30;

/**
 * The memory trend after the warm-up: the least-squares slope of the 30-s floors in
 * MB/min with an approximate 95 % interval, and what it says: flat when the whole
 * interval lies below the threshold, growing when it lies above zero and the slope is
 * over the threshold, otherwise not settled (a longer run narrows the interval).
 */
function memoryTrend(points: { x: number; y: number }[], thresholdMBPerMin: number) {
  const fit = fitSlope(windowFloors(points, TREND_WINDOW_S));
  if (!fit) return { slopeMBPerMin: null, ci95MBPerMin: null, points: 0, verdict: 'too few points after the warm-up', thresholdMBPerMin };
  const df = fit.n - 2;
  const t = 1.96 + 2.5 / Math.max(1, df); // Student's t at 97.5 %, approximately (within 0.2 for df ≥ 3)
  const slope = fit.slope * 60;
  const half = t * fit.se * 60;
  const verdict =
    slope + half < thresholdMBPerMin
      ? 'flat'
      : slope - half > 0 && slope >= thresholdMBPerMin
        ? 'growing'
        : 'not settled (run longer)';
  return { slopeMBPerMin: round(slope, 2), ci95MBPerMin: round(half, 2), points: fit.n, verdict, thresholdMBPerMin };
}

async function main(): Promise<void> {
  installCleanup();
  const o = parseOptions(process.argv.slice(2));
  const batch = Math.round(o.batchS * o.rate);
  const offered = o.units * o.rate;
  const messagesPerS = offered / batch;
  const faultAtS = o.faultAtS ?? Math.max(20, Math.round(o.durationS * 0.3));
  const cores = os.cpus().length;
  const startedAt = new Date();
  log(`${startedAt.toISOString()}  node ${process.version}  ${cores} cores (${os.cpus()[0]?.model ?? '?'})  ${Math.round(os.totalmem() / MB / 1024)} GB`);
  const loadText =
    `${fmtInt(o.units)} synthetic tractors × 1 position estimator × ${o.rate} sample/s = ${fmtInt(offered)} samples/s; ` +
    `each unit sends a batch every ${o.batchS} s (${batch} samples a message, QoS 1, its own MQTT connection) = ${fmtInt(messagesPerS)} messages/s`;
  log(`load: ${loadText}; ${o.users} dashboard users; ${Math.round(o.durationS / 6) / 10} min`);

  // -- PostgreSQL (bench:ingest's settings: production durability, pg_stat_statements)
  const pgSettings = benchPostgresSettings(true);
  const { postgres, pgRoot, dbUrl } = await startBenchPostgres(pgSettings);
  const db = new pg.Pool({ connectionString: dbUrl, max: 2 });
  await db.query('create extension if not exists pg_stat_statements');
  const pgVersion = (await db.query<{ server_version: string }>('show server_version')).rows[0].server_version;
  const postmasterPid = postmasterPidOf(postgres);

  // -- the fleet and the people
  const runKey = randomBytes(24).toString('base64url');
  const fleet = syntheticTractors(o.units, benchSecretFor(runKey));
  // A unit that sends a batch every few seconds is expected every few seconds: silence is
  // judged on the time between its messages, not between its samples.
  await provisionSyntheticTractors(db, fleet, Math.max(1, Math.round(1000 * Math.max(o.batchS, 1 / o.rate))));
  const password = randomBytes(18).toString('base64url');
  const people = Array.from({ length: o.users }, (_, i) => ({ email: `soak-viewer-${String(i + 1).padStart(3, '0')}@bench.example`, password }));
  if (people.length) {
    const hash = await bcrypt.hash(password, 10);
    await db.query(
      `insert into users (email, display_name, role, password_hash)
       select e, 'Soak viewer ' || right(split_part(e, '@', 1), 3), 'viewer', $2 from unnest($1::text[]) as e`,
      [people.map((p) => p.email), hash],
    );
  }
  log(`${o.users} viewer accounts for the dashboard users`);

  // -- the service
  const serviceLog = path.join(pgRoot, 'service.log');
  const inspectPort = o.liveHeapS > 0 ? await freePort() : null;
  const svc = await startBenchService({
    dbUrl,
    nodeFlags: inspectPort === null ? [] : [`--inspect=127.0.0.1:${inspectPort}`],
    // 50 people signing in within a minute from one address would trip the sign-in limit meant for guessing.
    serviceEnv: { WHITECAP_SIGN_IN_PER_MINUTE: '1000', ...o.serviceEnv },
    logFile: serviceLog,
  });
  const servicePid = svc.pid;
  log(`service pid ${servicePid}: HTTP 127.0.0.1:${svc.httpPort}, MQTT 127.0.0.1:${svc.mqttPort}`);
  const metricsText = async () => (await fetch(`${svc.baseUrl}/metrics`)).text();
  const heapProbe = inspectPort === null ? null : await LiveHeapProbe.connect(inspectPort);

  // -- publishers (bench:ingest's publisher-worker.ts)
  const faultUnits = Array.from({ length: o.faultUnits }, (_, k) => Math.floor(((k + 0.5) * o.units) / o.faultUnits));
  const workers = stack.workers;
  const recentP99: (number | null)[] = Array.from({ length: o.publishers }, () => null);
  const faultStarts = new Map<number, { unitKey: string; seq: number; tMs: number }>();
  let failure: Error | null = null;
  const per = Math.ceil(o.units / o.publishers);
  const connectBegan = performance.now();
  const pubs = forkPublishers(
    Array.from({ length: o.publishers }, (_, w) => ({
      url: `mqtt://127.0.0.1:${svc.mqttPort}`,
      runKey,
      totalUnits: o.units,
      from: w * per,
      to: Math.min(o.units, (w + 1) * per),
      rate: o.rate,
      rampS: 0,
      batch,
      reference: false,
      faultUnits,
      faultFactor: o.faultFactor,
      seed: 20261202,
      maxInFlightPerUnit: 1000,
      connectConcurrency: 50,
    })),
    (w, m) => {
      if (m.type === 'progress') recentP99[w] = m.recentP99Ms;
      else if (m.type === 'fault') faultStarts.set(m.unitIndex, { unitKey: m.unitKey, seq: m.seq, tMs: m.tMs });
    },
  );
  const latest = pubs.latest;
  const done = pubs.done;
  /** The first failure of the publishers or the dashboard users. */
  const failed = () => failure ?? pubs.failure();
  await pubs.connected;
  log(`${o.publishers} publisher processes: ${fmtInt(o.units)} units connected in ${Math.round(performance.now() - connectBegan)} ms`);

  // -- the dashboard users (this file again, in its own process)
  const usersChild: ChildProcess = fork(path.join(__dirname, 'soak-bench.ts'), [USERS_FLAG], {
    cwd: root,
    execArgv: ['--import', 'tsx'],
    stdio: ['ignore', 'inherit', 'inherit', 'ipc'],
  });
  workers.push(usersChild);
  const usersPid = usersChild.pid!;
  const usersState: { latest: Extract<FromUsers, { type: 'progress' }> | null; done: Extract<FromUsers, { type: 'done' }> | null } = { latest: null, done: null };
  const fleetAll = new LatencyHistogram();
  const heatmapAll = new LatencyHistogram();
  let fleetRow = new LatencyHistogram();
  let heatmapRow = new LatencyHistogram();
  let fleetErrorsRowStart = 0;
  let onUsersDone!: () => void;
  const usersDoneWaiter = new Promise<void>((resolve) => (onUsersDone = resolve));
  const ready = await new Promise<Extract<FromUsers, { type: 'ready' }>>((resolve, reject) => {
    usersChild.on('message', (m: FromUsers) => {
      if (m.type === 'ready') resolve(m);
      else if (m.type === 'progress') {
        usersState.latest = m;
        for (const ms of m.fleetMs) {
          fleetAll.record(ms);
          fleetRow.record(ms);
        }
        for (const ms of m.heatmapMs) {
          heatmapAll.record(ms);
          heatmapRow.record(ms);
        }
      } else if (m.type === 'done') {
        usersState.done = m;
        onUsersDone();
      } else if (m.type === 'error') {
        failure ??= new Error(`dashboard users: ${m.message}`);
        reject(failure);
      }
    });
    usersChild.on('exit', (code) => {
      if (!usersState.done) {
        failure ??= new Error(`the dashboard users' process exited with ${code}`);
        reject(failure);
      }
      onUsersDone();
    });
    usersChild.send({ type: 'config', config: {
        baseUrl: svc.baseUrl,
        users: people,
        pollMs: o.pollS * 1000,
        heatmapMs: o.heatmapS * 1000,
        dashboardRefresh: o.dashboardPoll ? { fleetAuditMs: 1500, heatmapAuditMs: 10_000 } : null,
      },
    } satisfies ToUsers);
  });
  const signIns = [...ready.signInMs].sort((a, b) => a - b);
  log(
    `${o.users} dashboard users signed in (sign-in median ${fmtMs(signIns[Math.floor(signIns.length / 2)])}, max ${fmtMs(signIns.at(-1))}); ` +
      `${ready.streamsOpen} live streams open`,
  );

  // -- baselines
  const metricsBefore = await metricsText();
  await db.query('select pg_stat_statements_reset()');
  const lastCpu = new Map<number, number>();
  const cpuOf = (pid: number) => {
    const v = treeCpuSeconds(pid);
    if (v !== null) lastCpu.set(pid, v);
    return lastCpu.get(pid) ?? 0;
  };
  const publishersCpuNow = () => pubs.cpuSeconds();

  // -- go: each publisher process starts its units batchS/publishers s after the previous one
  const startAtMs = Date.now() + 1000;
  const offsetMs = (o.batchS * 1000) / o.publishers;
  const faultAtMs = startAtMs + faultAtS * 1000;
  pubs.children.forEach((w, i) => {
    w.send({ type: 'go', startAtMs: Math.round(startAtMs + i * offsetMs), faultAtMs, steadyAtMs: startAtMs + o.warmupS * 1000 } satisfies ToWorker);
  });
  usersChild.send({ type: 'go', startAtMs } satisfies ToUsers);
  await sleep(Math.max(0, startAtMs - Date.now()));
  log(`load from ${new Date(startAtMs).toISOString()} for ${o.durationS} s; noise ×${o.faultFactor} on ${faultUnits.length} estimators from +${faultAtS} s`);

  // -- sampling, once a second
  const seconds: Second[] = [];
  const probes: Probe[] = [];
  const liveHeaps: (LiveHeap & { tS: number })[] = [];
  let liveHeapInFlight = false;
  let liveHeapNextS = o.liveHeapS;
  const rows: Row[] = [];
  const sum = (f: (c: WorkerCounts) => number) => latest.reduce((a, c) => a + (c ? f(c) : 0), 0);
  const streamEventsNow = () => {
    const s = usersState.latest?.stream;
    return s ? s.verdict + s.alert + s.other : 0;
  };
  const prev = {
    atMs: Date.now(),
    service: cpuOf(servicePid),
    postgres: cpuOf(postmasterPid),
    publishers: publishersCpuNow(),
    users: cpuOf(usersPid),
    machine: machineCpuSeconds(),
    self: process.cpuUsage(),
  };
  const first = { ...prev, self: process.cpuUsage() };
  const rowStart = { ...prev, tS: 0, acked: 0, published: 0, events: 0, secondIndex: 0, fleetErrors: 0 };
  const rssStart = rssBytes(servicePid);
  const endAtMs = startAtMs + o.durationS * 1000;
  log('    t   acked/s  PUBACK p99   fleet p50/p95/p99 ms   streams  events   RSS MB  heap MB   CPU % service/PG/publishers/users/other');
  let tick = 0;
  let probeInFlight = false;
  while (Date.now() < endAtMs) {
    await sleep(Math.min(1000 - ((Date.now() - startAtMs) % 1000), endAtMs - Date.now()));
    const failedNow = failed();
    if (failedNow) throw failedNow;
    const now = Date.now();
    const dt = (now - prev.atMs) / 1000;
    if (treeCpuSeconds(servicePid) === null) throw new Error(`the service exited during the run:\n${fs.readFileSync(serviceLog, 'utf8').slice(-3000)}`);
    const c = { service: cpuOf(servicePid), postgres: cpuOf(postmasterPid), publishers: publishersCpuNow(), users: cpuOf(usersPid), machine: machineCpuSeconds(), self: process.cpuUsage() };
    const selfS = (c.self.user + c.self.system - prev.self.user - prev.self.system) / 1e6;
    const rss = rssBytes(servicePid);
    const pct = (a: number, b: number) => round(((a - b) / dt) * 100);
    const s: Second = {
      tS: round((now - startAtMs) / 1000, 1)!,
      ackedSamples: sum((x) => x.ackedSamples),
      publishedSamples: sum((x) => x.publishedSamples),
      ackedMessages: sum((x) => x.ackedMessages),
      serviceRssMB: rss === null ? null : round(rss / MB),
      serviceCpuPct: pct(c.service, prev.service),
      postgresCpuPct: pct(c.postgres, prev.postgres),
      publishersCpuPct: pct(c.publishers, prev.publishers),
      usersCpuPct: pct(c.users, prev.users),
      machineBusyPct: round(((c.machine.busy - prev.machine.busy) / (c.machine.total - prev.machine.total)) * 100 * cores),
      otherPct: null,
      pubackP99Ms: recentP99.some((x) => x !== null) ? round(Math.max(...recentP99.map((x) => x ?? 0)), 0) : null,
      streamsOpen: usersState.latest?.streamsOpen ?? ready.streamsOpen,
      streamEvents: streamEventsNow(),
    };
    s.otherPct = round((s.machineBusyPct ?? 0) - (s.serviceCpuPct ?? 0) - (s.postgresCpuPct ?? 0) - (s.publishersCpuPct ?? 0) - (s.usersCpuPct ?? 0) - (selfS / dt) * 100);
    seconds.push(s);
    Object.assign(prev, { atMs: now, ...c });
    // The service's own figures every 5 s, without holding up the once-a-second sampling when it is slow to answer.
    if (++tick % 5 === 0 && !probeInFlight) {
      probeInFlight = true;
      const tS = s.tS;
      metricsText()
        .then((text) =>
          probes.push({
            tS,
            heapUsedMB: round(metric(text, 'whitecap_process_nodejs_heap_size_used_bytes') / MB)!,
            oldAfterFullGcMB: Number.isFinite(metric(text, 'whitecap_process_old_generation_after_full_gc_bytes'))
              ? round(metric(text, 'whitecap_process_old_generation_after_full_gc_bytes') / MB)
              : null,
            externalMB: round(metric(text, 'whitecap_process_nodejs_external_memory_bytes') / MB)!,
            writeQueue: metric(text, 'whitecap_write_queue_samples'),
            loopDelayP99Ms: round(metric(text, 'whitecap_process_nodejs_eventloop_lag_p99_seconds') * 1000, 1)!,
          }),
        )
        .catch(() => undefined /* the service too busy to answer: the other figures say so */)
        .finally(() => (probeInFlight = false));
    }
    if (heapProbe && s.tS >= liveHeapNextS && !liveHeapInFlight) {
      liveHeapInFlight = true;
      liveHeapNextS += o.liveHeapS;
      const tS = s.tS;
      heapProbe
        .measure()
        .then((h) => liveHeaps.push({ tS, ...h }))
        .catch((e: Error) => log(`live heap probe at +${tS} s failed: ${e.message}`))
        .finally(() => (liveHeapInFlight = false));
    }
    const rowDue = s.tS - rowStart.tS >= o.rowS - 0.01 || now >= endAtMs;
    if (rowDue) {
      const span = s.tS - rowStart.tS;
      const inRow = seconds.slice(rowStart.secondIndex);
      const rowPct = (a: number, b: number) => round(((a - b) / span) * 100);
      const rssIn = inRow.map((x) => x.serviceRssMB).filter((x): x is number => x !== null);
      const heap = probes.filter((p) => p.tS > rowStart.tS && p.tS <= s.tS).at(-1)?.heapUsedMB ?? null;
      const kept = probes.filter((p) => p.tS > rowStart.tS && p.tS <= s.tS).at(-1)?.oldAfterFullGcMB ?? null;
      const fleetErrors = usersState.latest?.fleetErrors ?? 0;
      const row: Row = {
        fromS: Math.round(rowStart.tS),
        toS: Math.round(s.tS),
        ackedSamplesPerS: round((s.ackedSamples - rowStart.acked) / span, 0),
        offeredSamplesPerS: round((s.publishedSamples - rowStart.published) / span, 0),
        pubackP99MaxMs: inRow.some((x) => x.pubackP99Ms !== null) ? Math.max(...inRow.map((x) => x.pubackP99Ms ?? 0)) : null,
        fleetRequests: fleetRow.count,
        fleetP50Ms: round(fleetRow.quantile(0.5), 1),
        fleetP95Ms: round(fleetRow.quantile(0.95), 1),
        fleetP99Ms: round(fleetRow.quantile(0.99), 1),
        fleetErrors: fleetErrors - fleetErrorsRowStart,
        heatmapRequests: heatmapRow.count,
        heatmapP95Ms: round(heatmapRow.quantile(0.95), 1),
        streamEvents: s.streamEvents - rowStart.events,
        streamsOpenMin: inRow.length ? Math.min(...inRow.map((x) => x.streamsOpen)) : s.streamsOpen,
        serviceRssMB: s.serviceRssMB,
        serviceRssMinMB: rssIn.length ? Math.min(...rssIn) : null,
        serviceRssMaxMB: rssIn.length ? Math.max(...rssIn) : null,
        serviceHeapUsedMB: heap,
        serviceKeptMB: kept,
        serviceCpuPct: rowPct(c.service, rowStart.service),
        postgresCpuPct: rowPct(c.postgres, rowStart.postgres),
        publishersCpuPct: rowPct(c.publishers, rowStart.publishers),
        usersCpuPct: rowPct(c.users, rowStart.users),
        otherPct: round(inRow.reduce((a, x) => a + (x.otherPct ?? 0), 0) / Math.max(1, inRow.length)),
      };
      rows.push(row);
      log(
        `${String(row.toS).padStart(5)} s ${fmtInt(row.ackedSamplesPerS).padStart(8)} ${fmtMs(row.pubackP99MaxMs).padStart(10)}   ` +
          `${`${row.fleetP50Ms ?? '–'}/${row.fleetP95Ms ?? '–'}/${row.fleetP99Ms ?? '–'}`.padStart(20)}   ${String(row.streamsOpenMin).padStart(7)} ${fmtInt(row.streamEvents).padStart(7)} ` +
          `${String(row.serviceRssMB).padStart(8)} ${String(row.serviceHeapUsedMB ?? '–').padStart(8)}   ` +
          `${row.serviceCpuPct}/${row.postgresCpuPct}/${row.publishersCpuPct}/${row.usersCpuPct}/${row.otherPct}`,
      );
      Object.assign(rowStart, { ...c, tS: s.tS, acked: s.ackedSamples, published: s.publishedSamples, events: s.streamEvents, secondIndex: seconds.length });
      fleetRow = new LatencyHistogram();
      heatmapRow = new LatencyHistogram();
      fleetErrorsRowStart = fleetErrors;
    }
  }
  const loadEndedMs = Date.now();
  /** Messages published and not yet acknowledged when the load ended: a backlog that grows says the service is not keeping up. */
  const inFlightAtEnd = sum((x) => x.inFlightMessages);
  const cpuAtEnd = { service: cpuOf(servicePid), postgres: cpuOf(postmasterPid), publishers: publishersCpuNow(), users: cpuOf(usersPid), machine: machineCpuSeconds(), self: process.cpuUsage(first.self) };
  const rssEnd = rssBytes(servicePid);

  // -- stop publishing, wait for every PUBACK; the users watch a few seconds longer (late alerts), then leave
  log('stopping the publishers; waiting for every PUBACK…');
  for (const w of pubs.children) w.send({ type: 'stop', drainMs: 120_000 } satisfies ToWorker);
  await pubs.finished;
  const drainedAtMs = Date.now();
  if (done.length !== o.publishers) throw failed() ?? new Error('a publisher ended without its report');
  await sleep(3000);
  usersChild.send({ type: 'stop' } satisfies ToUsers);
  await Promise.race([usersDoneWaiter, sleep(15_000)]);
  const ud = usersState.done;
  if (!ud) throw failed() ?? new Error('the dashboard users ended without their report');
  // The users' last progress report (sent just before 'done') holds their final request counts.
  const usersFinal = usersState.latest;

  // -- what the service and the database say
  const metricsAfter = await metricsText();
  const statements = (
    await db.query<{ query: string; calls: string; total_ms: number; mean_ms: number; rows: string }>(
      `select regexp_replace(query, '\\s+', ' ', 'g') as query, calls, total_exec_time as total_ms, mean_exec_time as mean_ms, rows
         from pg_stat_statements where dbid = (select oid from pg_database where datname = current_database())
        order by total_exec_time desc limit 10`,
    )
  ).rows.map((r) => ({ query: r.query.slice(0, 110), calls: Number(r.calls), totalMs: round(r.total_ms, 0), meanMs: round(r.mean_ms, 3), rows: Number(r.rows) }));
  const storedRows = Number((await db.query<{ n: string }>('select count(*) as n from innovation_samples')).rows[0].n);
  const matched = await countStoredOfAcknowledged(db, done.flatMap((d) => d.acked));
  const quarantined = Number((await db.query<{ n: string }>('select count(*) as n from quarantine')).rows[0].n);
  const alertRows = (
    await db.query<{ unit: string; estimator_id: number; rule: string; opened_at: Date; at_seq: string | null }>(
      `select u.key as unit, e.id as estimator_id, a.rule, a.opened_at, (ev.data->>'atSeq')::bigint as at_seq
         from alerts a
         join estimators e on e.id = a.estimator_id
         join units u on u.id = e.unit_id
         left join alert_events ev on ev.alert_id = a.id and ev.kind = 'opened'
        order by a.opened_at`,
    )
  ).rows;
  const estimatorIds = new Map(
    (
      await db.query<{ unit: string; id: number }>(
        `select u.key as unit, e.id from units u join estimators e on e.unit_id = u.id and e.key = 'position' where u.key = any($1::text[])`,
        [[...faultStarts.values()].map((f) => f.unitKey)],
      )
    ).rows.map((r) => [r.unit, Number(r.id)]),
  );

  // -- stop the service
  heapProbe?.close();
  svc.child.kill('SIGTERM');
  const serviceStopped = await waitForExit(svc.child, 30_000);
  if (!serviceStopped) svc.child.kill('SIGKILL');
  svc.logStream.end();
  // JSON lines by level and message (the indented lines of a stack trace left out).
  const logMessages = countLogMessages((fs.existsSync(serviceLog) ? fs.readFileSync(serviceLog, 'utf8') : '').split('\n').filter((l) => l && !/^\s/.test(l)));
  await db.end();

  // ---------------------------------------------------------------- figures
  const totals = sumWorkerCounts(done.map((d) => d.counts));
  const p2a = new LatencyHistogram();
  const steadyP2a = new LatencyHistogram();
  for (const d of done) {
    p2a.merge(d.publishToAck);
    steadyP2a.merge(d.steadyPublishToAck);
  }
  const runS = (loadEndedMs - startAtMs) / 1000;
  const cpuPct = (sec: number) => round((sec / runS) * 100);
  const selfCpu = (cpuAtEnd.self.user + cpuAtEnd.self.system) / 1e6;
  const serviceCpu = cpuAtEnd.service - first.service;
  const postgresCpu = cpuAtEnd.postgres - first.postgres;
  const publishersCpu = cpuAtEnd.publishers - first.publishers;
  const usersCpu = cpuAtEnd.users - first.users;
  const machineBusy = cpuAtEnd.machine.busy - first.machine.busy;
  const steadyFrom = seconds.find((s) => s.tS >= o.warmupS) ?? seconds[0];
  const steadyTo = seconds[seconds.length - 1];
  const sustained = (steadyTo.ackedSamples - steadyFrom.ackedSamples) / Math.max(1, steadyTo.tS - steadyFrom.tS);
  // 10,000 estimators appearing at once: when the first PUBACK came, and when the service last ran more than 5 s behind.
  const coldStart = {
    firstAckAtS: seconds.find((x) => x.ackedSamples > 0)?.tS ?? null,
    lastPubackP99Over5sAtS: [...seconds].reverse().find((x) => (x.pubackP99Ms ?? 0) > 5000)?.tS ?? null,
  };
  const offeredSteady = (steadyTo.publishedSamples - steadyFrom.publishedSamples) / Math.max(1, steadyTo.tS - steadyFrom.tS);

  // memory after the warm-up
  const rssPoints = seconds.filter((s) => s.tS >= o.warmupS && s.serviceRssMB !== null).map((s) => ({ x: s.tS, y: s.serviceRssMB! }));
  const heapPoints = probes.filter((p) => p.tS >= o.warmupS).map((p) => ({ x: p.tS, y: p.heapUsedMB }));
  const rssValues = seconds.map((s) => s.serviceRssMB).filter((x): x is number => x !== null);
  const rssTrend = memoryTrend(rssPoints, 2);
  const heapTrend = memoryTrend(heapPoints, 2);
  const afterGcPoints = probes.filter((p) => p.tS >= o.warmupS && p.oldAfterFullGcMB !== null).map((p) => ({ x: p.tS, y: p.oldAfterFullGcMB! }));
  const afterGcTrend = memoryTrend(afterGcPoints, 2);
  const externalTrend = memoryTrend(probes.filter((p) => p.tS >= o.warmupS).map((p) => ({ x: p.tS, y: p.externalMB })), 2);
  const liveAfterWarmup = liveHeaps.filter((h) => h.tS >= o.warmupS);
  const liveHeapTrend = memoryTrend(liveAfterWarmup.map((h) => ({ x: h.tS, y: h.heapUsedMB })), 2);
  const liveExternalTrend = memoryTrend(liveAfterWarmup.map((h) => ({ x: h.tS, y: h.externalMB })), 2);

  // live streams
  const streamsMin = seconds.length ? Math.min(...seconds.map((s) => s.streamsOpen)) : ready.streamsOpen;
  const eventLag = new LatencyHistogram();
  eventLag.merge(ud.eventLag);

  // fault → alert, in the database and on the users' live streams
  const faulted = [...faultStarts.values()]
    .sort((a, b) => a.unitKey.localeCompare(b.unitKey))
    .map((f) => {
      const a = alertRows.find((r) => r.unit === f.unitKey && CHECK_RULES.has(r.rule) && r.opened_at.getTime() >= f.tMs - 1);
      const estimatorId = estimatorIds.get(f.unitKey) ?? null;
      const live = ud.alertOpens
        .filter((x) => x.estimatorId === estimatorId && CHECK_RULES.has(x.rule) && Date.parse(x.at) >= f.tMs - 1)
        .sort((x, y) => x.firstMs - y.firstMs)[0];
      return {
        unit: f.unitKey,
        estimatorId,
        faultFirstSeq: f.seq,
        faultFirstSampleAt: new Date(f.tMs).toISOString(),
        rule: a?.rule ?? null,
        openedAt: a ? a.opened_at.toISOString() : null,
        dbLatencyMs: a ? a.opened_at.getTime() - f.tMs : null,
        samplesAfterFault: a && a.at_seq !== null ? Number(a.at_seq) - f.seq + 1 : null,
        liveRule: live?.rule ?? null,
        liveFirstLatencyMs: live ? live.firstMs - f.tMs : null,
        liveLastLatencyMs: live ? live.lastMs - f.tMs : null,
        liveUsers: live?.users ?? 0,
      };
    });
  const spread = (xs: (number | null)[]) => {
    const v = xs.filter((x): x is number => x !== null).sort((a, b) => a - b);
    return { detected: v.length, minMs: v[0] ?? null, medianMs: v.length ? v[Math.floor(v.length / 2)] : null, maxMs: v.at(-1) ?? null };
  };
  const faultByUnit = new Map([...faultStarts.values()].map((f) => [f.unitKey, f]));
  const otherAlerts = new Map<string, number>();
  for (const r of alertRows) {
    const f = faultByUnit.get(r.unit);
    if (f && CHECK_RULES.has(r.rule) && r.opened_at.getTime() >= f.tMs - 1) continue;
    otherAlerts.set(r.rule, (otherAlerts.get(r.rule) ?? 0) + 1);
  }

  const m = (name: string, labels?: string) => metric(metricsAfter, name, labels) - metric(metricsBefore, name, labels);
  const lost = totals.ackedSamples - matched;
  const result = {
    date: startedAt.toISOString(),
    commit: gitCommit(),
    machine: { node: process.version, cores, cpuModel: os.cpus()[0]?.model ?? null, memoryGB: round(os.totalmem() / MB / 1024, 1), platform: `${os.type()} ${os.release()}` },
    postgres: { version: pgVersion, settings: pgSettings },
    load: {
      text: loadText,
      units: o.units,
      estimators: o.units,
      estimatorsPerUnit: 1,
      samplesPerSPerEstimator: o.rate,
      offeredSamplesPerS: offered,
      batchSeconds: o.batchS,
      samplesPerMessage: batch,
      messagesPerS: round(messagesPerS, 0),
      mqttConnections: o.units,
      publishers: o.publishers,
      publisherStartOffsetS: round(offsetMs / 1000, 2),
      durationS: o.durationS,
      warmupS: o.warmupS,
      why: 'A field unit on a cellular link buffers its samples and sends a batch every few seconds; one message per sample would be 10,000 messages/s, which at the per-message cost bench:ingest measured does not fit on this 2-core machine beside PostgreSQL.',
    },
    users: {
      count: o.users,
      role: 'viewer',
      fleetRequest: `GET ${FLEET_PATH}`,
      pollS: o.pollS,
      refetchOnLiveChanges: o.dashboardPoll,
      heatmapRequest: o.heatmapS > 0 ? 'GET /api/fleet/heatmap?from=<now − 1 h>&to=<now>&buckets=60' : null,
      heatmapS: o.heatmapS,
      liveStream: 'GET /api/events (server-sent events), one connection per user, held for the whole run',
      note: o.dashboardPoll
        ? "As the dashboard's fleet screen: the table on every live change (gathered for 1.5 s) and every 30 s, the heatmap on a verdict change (gathered for 10 s) and every 60 s."
        : "The dashboard's fleet screen refetches the table on a live change (gathered for 1.5 s) and at least every 30 s; here each user polls at a fixed interval instead, a heavier and steadier load (--poll dashboard does as the screen does).",
      signInMs: { median: round(signIns[Math.floor(signIns.length / 2)], 0), max: round(signIns.at(-1), 0) },
    },
    throughput: {
      offeredSamplesPerS: round(offeredSteady, 0),
      sustainedSamplesPerS: round(sustained, 0),
      publishedSamples: totals.publishedSamples,
      ackedSamples: totals.ackedSamples,
      storedRows,
      lost,
      storedNotAcknowledged: storedRows - matched,
      quarantined,
      publishedMessages: totals.publishedMessages,
      ackedMessages: totals.ackedMessages,
      unacknowledgedMessages: totals.publishedMessages - totals.ackedMessages,
      skippedByPublishers: totals.skippedSamples,
      mqttDisconnects: totals.disconnects,
      clientErrors: totals.errors,
      drainS: round((drainedAtMs - loadEndedMs) / 1000, 1),
      nothingLost: lost === 0 && quarantined === 0,
      coldStart,
      inFlightMessagesAtEnd: inFlightAtEnd,
      publishToCommit: roundAll(p2a.summary()),
      steadyPublishToCommit: roundAll(steadyP2a.summary()),
    },
    api: {
      fleet: { ...roundAll(fleetAll.summary()), p95Ms: round(fleetAll.quantile(0.95), 1), errors: usersFinal?.fleetErrors ?? 0 },
      heatmap: { ...roundAll(heatmapAll.summary()), p95Ms: round(heatmapAll.quantile(0.95), 1), errors: usersFinal?.heatmapErrors ?? 0 },
      errorKinds: ud.errorKinds,
      tokenRefreshes: ud.refreshes,
    },
    liveStreams: {
      users: o.users,
      openAtStart: ready.streamsOpen,
      openAtEnd: ud.streamsOpen,
      minOpenDuringRun: streamsMin,
      events: { verdict: ud.stream.verdict, alert: ud.stream.alert, other: ud.stream.other, total: ud.stream.verdict + ud.stream.alert + ud.stream.other },
      eventsPerUser: o.users ? round((ud.stream.verdict + ud.stream.alert + ud.stream.other) / o.users, 0) : null,
      comments: ud.stream.comments,
      disconnects: ud.stream.disconnects,
      reconnects: ud.stream.reconnects,
      refused: ud.stream.refused,
      deliveryLag: roundAll(eventLag.summary()),
      deliveryLagNote: "received by the user minus the event's own time (when the service decided the change)",
    },
    alerts: {
      faultAtS,
      faultFactor: o.faultFactor,
      faulted,
      database: spread(faulted.map((f) => f.dbLatencyMs)),
      liveFirstUser: spread(faulted.map((f) => f.liveFirstLatencyMs)),
      liveLastUser: spread(faulted.map((f) => f.liveLastLatencyMs)),
      otherAlerts: Object.fromEntries(otherAlerts),
      alertsOpened: m('whitecap_alerts_opened_total'),
    },
    memory: {
      serviceRssStartMB: round((rssStart ?? 0) / MB),
      serviceRssEndMB: round((rssEnd ?? 0) / MB),
      serviceRssMaxMB: rssValues.length ? Math.max(...rssValues) : null,
      serviceRssAfterWarmup: rssTrend,
      serviceHeapUsedAfterWarmup: heapTrend,
      oldGenerationAfterFullGc: {
        firstMB: probes.find((p) => p.oldAfterFullGcMB !== null)?.oldAfterFullGcMB ?? null,
        lastMB: probes.at(-1)?.oldAfterFullGcMB ?? null,
        maxMB: Math.max(...probes.map((p) => p.oldAfterFullGcMB ?? 0)),
        afterWarmup: afterGcTrend,
        note: "the service's own metric whitecap_process_old_generation_after_full_gc_bytes (V8's old generation right after its last full collection), read every 5 s",
      },
      externalAfterWarmup: externalTrend,
      liveHeapEveryS: o.liveHeapS || null,
      liveHeapAfterWarmup: heapProbe ? liveHeapTrend : null,
      liveExternalAfterWarmup: heapProbe ? liveExternalTrend : null,
      liveHeap: liveHeaps,
      liveHeapMethod: heapProbe
        ? `every ${o.liveHeapS} s a full garbage collection forced through the service's inspector (HeapProfiler.collectGarbage), then process.memoryUsage() read inside the service; the slope is fitted to these points after the warm-up`
        : null,
      method: `least-squares slope of the ${TREND_WINDOW_S}-s floors (the lowest value in each ${TREND_WINDOW_S} s: what is left after a garbage collection) of the once-a-second VmRSS, and of the JS heap used from the service's /metrics every 5 s, after the warm-up; ± is an approximate 95 % interval; flat: the whole interval below the threshold; growing: above zero and the slope over the threshold; otherwise not settled`,
    },
    cpu: {
      note: `100 % = one core; the machine has ${cores * 100} %`,
      servicePct: cpuPct(serviceCpu),
      postgresPct: cpuPct(postgresCpu),
      publishersPct: cpuPct(publishersCpu),
      dashboardUsersPct: cpuPct(usersCpu),
      benchmarkItselfPct: cpuPct(selfCpu),
      machineBusyPct: cpuPct(machineBusy),
      otherPct: cpuPct(machineBusy - serviceCpu - postgresCpu - publishersCpu - usersCpu - selfCpu),
      serviceCpuUsPerSample: totals.ackedSamples ? round((serviceCpu / totals.ackedSamples) * 1e6, 1) : null,
      serviceCpuUsPerMessage: totals.ackedMessages ? round((serviceCpu / totals.ackedMessages) * 1e6, 1) : null,
    },
    service: {
      samplesStored: m('whitecap_samples_stored_total'),
      maxWriteQueue: probes.length ? Math.max(...probes.map((p) => p.writeQueue)) : null,
      loopDelayP99MaxMs: probes.length ? Math.max(...probes.map((p) => p.loopDelayP99Ms)) : null,
      gcSeconds: round(m('whitecap_process_nodejs_gc_duration_seconds_sum'), 1),
      logMessages: Object.fromEntries([...logMessages.entries()].slice(0, 10)),
      stoppedCleanly: serviceStopped,
    },
    postgresStatements: statements,
    rows,
    seconds,
    probes,
  };

  const md = markdown(result);
  console.log('\n' + md);
  if (o.write) {
    fs.mkdirSync(resultsDir, { recursive: true });
    fs.writeFileSync(path.join(resultsDir, `soak-${o.name}.json`), JSON.stringify(result, null, 2) + '\n');
    fs.writeFileSync(path.join(resultsDir, `soak-${o.name}.md`), md);
    log(`wrote ingest/bench/results/soak-${o.name}.json and soak-${o.name}.md`);
  }
  stopBenchPostgres();
  log('stopped the service, the publishers, the users and PostgreSQL; removed the cluster');
}

function roundAll<T extends Record<string, number | null>>(o: T): T {
  return Object.fromEntries(Object.entries(o).map(([k, v]) => [k, k === 'count' ? v : round(v, 1)])) as T;
}

// ---------------------------------------------------------------- the markdown report

// eslint-disable-next-line @typescript-eslint/no-explicit-any
function markdown(r: any): string {
  const s = (ms: number | null) => (ms === null ? 'n/a' : `${(ms / 1000).toFixed(1)} s`);
  const t = r.throughput;
  const a = r.alerts;
  const ls = r.liveStreams;
  const c = r.cpu;
  const mem = r.memory;
  const trend = (
    x: { slopeMBPerMin: number | null; ci95MBPerMin: number | null; verdict: string; points: number; thresholdMBPerMin: number },
    of = `the ${TREND_WINDOW_S}-s floors`,
    unit = 'floors',
  ) =>
    x.slopeMBPerMin === null
      ? x.verdict
      : `slope of ${of} ${x.slopeMBPerMin >= 0 ? '+' : ''}${x.slopeMBPerMin} ± ${x.ci95MBPerMin} MB/min (${x.points} ${unit}): **${x.verdict}** (threshold ${x.thresholdMBPerMin} MB/min)`;
  const lines: string[] = [];
  lines.push('# Soak benchmark (`npm run bench:soak`)');
  lines.push('');
  lines.push(
    `${r.date} · ${r.commit ? `commit ${r.commit} · ` : ''}Node ${r.machine.node} · ${r.machine.cores} cores (${r.machine.cpuModel}) · ${r.machine.memoryGB} GB · PostgreSQL ${r.postgres.version}`,
  );
  lines.push('');
  lines.push(`Load: ${r.load.text}, for ${Math.round(r.load.durationS / 6) / 10} min. ${r.load.why} The units' cycles are spread over the ${r.load.batchSeconds} s (${r.load.publishers} publisher processes, each starting its units ${r.load.publisherStartOffsetS} s after the previous one), so messages arrive evenly.`);
  lines.push('');
  lines.push(
    `Dashboard users: ${r.users.count} viewers, each signed in (POST /api/auth/sign-in), holding the live stream (GET /api/events) open, requesting the fleet table as the dashboard does (\`${r.users.fleetRequest}\`) every ${r.users.pollS} s` +
      (r.users.refetchOnLiveChanges ? ' and on live changes' : '') +
      (r.users.heatmapRequest ? ` and the heatmap (\`${r.users.heatmapRequest}\`) every ${r.users.heatmapS} s` : '') +
      `. ${r.users.note}`,
  );
  lines.push('');
  lines.push(
    `PostgreSQL: ${Object.entries(r.postgres.settings)
      .map(([k, v]) => `${k}=${v}`)
      .join(', ')}. The service, PostgreSQL, the publishers and the users share this machine's ${r.machine.cores} cores.`,
  );
  lines.push('');
  lines.push('| figure | value |');
  lines.push('| --- | --- |');
  lines.push(
    `| samples in = samples stored | ${fmtInt(t.ackedSamples)} acknowledged, ${fmtInt(t.storedRows)} rows stored, **${fmtInt(t.lost)} acknowledged but missing**, ${fmtInt(t.quarantined)} quarantined; ${fmtInt(t.ackedMessages)} of ${fmtInt(t.publishedMessages)} messages acknowledged${t.unacknowledgedMessages ? ` (${fmtInt(t.unacknowledgedMessages)} not)` : ''}; ${t.nothingLost ? 'nothing lost' : '**samples lost**'} |`,
  );
  const keepsUp = t.sustainedSamplesPerS !== null && t.offeredSamplesPerS !== null && t.sustainedSamplesPerS >= 0.98 * t.offeredSamplesPerS;
  lines.push(`| sustained after the warm-up | **${fmtInt(t.sustainedSamplesPerS)} samples/s committed** (offered ${fmtInt(t.offeredSamplesPerS)}: ${keepsUp ? 'keeps up' : '**falls behind**'}); ${fmtInt(t.inFlightMessagesAtEnd)} messages awaiting PUBACK when the load ended; ${fmtInt(t.skippedByPublishers)} samples skipped by late publishers, ${fmtInt(t.mqttDisconnects)} MQTT disconnects, ${fmtInt(t.clientErrors)} client errors; drain ${t.drainS} s |`);
  lines.push(
    `| start (every estimator new to the service) | first PUBACK at +${t.coldStart.firstAckAtS ?? 'n/a'} s; PUBACK p99 (per second) last above 5 s at ${t.coldStart.lastPubackP99Over5sAtS === null ? 'no time' : `+${t.coldStart.lastPubackP99Over5sAtS} s`} |`,
  );
  lines.push(`| publish → commit (PUBACK), per message, after the warm-up | p50 ${fmtMs(t.steadyPublishToCommit.p50Ms)}, p99 ${fmtMs(t.steadyPublishToCommit.p99Ms)}, max ${fmtMs(t.steadyPublishToCommit.maxMs)} |`);
  const f = r.api.fleet;
  lines.push(`| fleet table, \`${r.users.fleetRequest.replace(/^GET /, '')}\` | **p50 ${fmtMs(f.p50Ms)}, p95 ${fmtMs(f.p95Ms)}, p99 ${fmtMs(f.p99Ms)}**, max ${fmtMs(f.maxMs)}; ${fmtInt(f.count)} requests, ${fmtInt(f.errors)} failed |`);
  if (r.users.heatmapRequest) {
    const h = r.api.heatmap;
    lines.push(`| fleet heatmap, last hour | p50 ${fmtMs(h.p50Ms)}, p95 ${fmtMs(h.p95Ms)}, p99 ${fmtMs(h.p99Ms)}, max ${fmtMs(h.maxMs)}; ${fmtInt(h.count)} requests, ${fmtInt(h.errors)} failed |`);
  }
  lines.push(`| sign-in (bcrypt) | median ${fmtMs(r.users.signInMs.median)}, max ${fmtMs(r.users.signInMs.max)}; ${r.api.tokenRefreshes} token refreshes |`);
  lines.push(
    `| live streams | **${ls.openAtEnd}/${ls.users} held at the end** (${ls.openAtStart} at the start, at least ${ls.minOpenDuringRun} throughout); **${fmtInt(ls.events.total)} events received** (verdict ${fmtInt(ls.events.verdict)}, alert ${fmtInt(ls.events.alert)}; ${fmtInt(ls.eventsPerUser)} per user); **${ls.disconnects} disconnects**, ${ls.reconnects} reconnects, ${ls.refused} refused; delivery lag p50 ${fmtMs(ls.deliveryLag.p50Ms)}, p99 ${fmtMs(ls.deliveryLag.p99Ms)} |`,
  );
  lines.push(
    `| fault → alert in the database (noise ×${a.faultFactor} from +${a.faultAtS} s on ${a.faulted.length} estimators) | ${a.database.detected}/${a.faulted.length} alerted; median **${s(a.database.medianMs)}** (${s(a.database.minMs)}–${s(a.database.maxMs)}); rules: ${[...new Set(a.faulted.map((x: { rule: string | null }) => x.rule ?? 'none'))].join(', ')}; samples after the fault: ${a.faulted.map((x: { samplesAfterFault: number | null }) => x.samplesAfterFault ?? 'n/a').join(', ')} |`,
  );
  lines.push(
    `| fault → alert on a live stream | first user: ${a.liveFirstUser.detected}/${a.faulted.length}, median **${s(a.liveFirstUser.medianMs)}** (${s(a.liveFirstUser.minMs)}–${s(a.liveFirstUser.maxMs)}); last user: median ${s(a.liveLastUser.medianMs)}, max ${s(a.liveLastUser.maxMs)}; users who saw each: ${a.faulted.map((x: { liveUsers: number }) => x.liveUsers).join(', ')} |`,
  );
  lines.push(`| other alerts (healthy estimators, or not from the checks) | ${Object.keys(a.otherAlerts).length ? Object.entries(a.otherAlerts).map(([k, v]) => `${k}: ${v}`).join(', ') : 'none'} |`);
  lines.push(`| service RSS | start ${mem.serviceRssStartMB} MB, end ${mem.serviceRssEndMB} MB, max ${mem.serviceRssMaxMB} MB; after the ${r.load.warmupS}-s warm-up ${trend(mem.serviceRssAfterWarmup)} |`);
  lines.push(`| service JS heap used | after the warm-up ${trend(mem.serviceHeapUsedAfterWarmup)} |`);
  if (mem.oldGenerationAfterFullGc) {
    const g = mem.oldGenerationAfterFullGc;
    lines.push(
      `| **what the service keeps** (old generation after each full collection) | ${g.firstMB ?? 'n/a'} MB at the first reading, ${g.lastMB ?? 'n/a'} MB at the end, max ${g.maxMB} MB; after the warm-up ${trend(g.afterWarmup)}; external memory (Buffers: messages in hand) ${trend(mem.externalAfterWarmup)} |`,
    );
  }
  if (mem.liveHeapAfterWarmup) {
    const lh = mem.liveHeap as (LiveHeap & { tS: number })[];
    const pauses = lh.map((h) => h.pauseMs).sort((x, y) => x - y);
    lines.push(
      `| service memory kept (after a full collection every ${mem.liveHeapEveryS} s) | JS heap ${lh.length ? `${lh[0].heapUsedMB} MB at +${Math.round(lh[0].tS)} s, ${lh.at(-1)!.heapUsedMB} MB at +${Math.round(lh.at(-1)!.tS)} s` : 'n/a'}; after the warm-up ${trend(mem.liveHeapAfterWarmup, 'the readings', 'readings')}; external (Buffers and other native memory held by JS objects) ${trend(mem.liveExternalAfterWarmup, 'the readings', 'readings')}; each forced collection stopped the service for ${pauses.length ? `${pauses[0]}–${pauses.at(-1)} ms` : 'n/a'} |`,
    );
  }
  lines.push(`| CPU (100 % = one core of ${r.machine.cores * 100} %) | service **${c.servicePct} %** (${c.serviceCpuUsPerMessage} µs per message, ${c.serviceCpuUsPerSample} µs per sample), PostgreSQL **${c.postgresPct} %**, publishers **${c.publishersPct} %**, dashboard users ${c.dashboardUsersPct} %, this benchmark ${c.benchmarkItselfPct} %, other processes ${c.otherPct} %; machine busy ${c.machineBusyPct} % |`);
  lines.push(`| service | write queue max ${fmtInt(r.service.maxWriteQueue)} samples; event-loop delay p99 up to ${r.service.loopDelayP99MaxMs} ms; GC ${r.service.gcSeconds} s; stopped cleanly: ${r.service.stoppedCleanly ? 'yes' : 'no'}; log: ${
      Object.keys(r.service.logMessages).length
        ? Object.entries(r.service.logMessages as Record<string, number>)
            .slice(0, 4)
            .map(([k, v]) => `${k.replace(/\|/g, '\\|')} (${v})`)
            .join('; ')
        : 'nothing at warn or above'
    } |`);
  lines.push('');
  lines.push('Over time (service CPU, PostgreSQL, publishers, users and other processes in % of one core; fleet-table latency of the requests in the row; heap: the JS heap in use at the last reading in the row; kept: the old generation after the last full collection of the service):');
  lines.push('');
  lines.push('| t (s) | committed samples/s | PUBACK p99 | fleet p50 / p95 / p99 ms | requests | streams open (min) | events | RSS MB (min–max) | heap MB | kept MB | CPU service / PG / publishers / users / other |');
  lines.push('| ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: | --- |');
  for (const row of r.rows as Row[]) {
    lines.push(
      `| ${row.fromS}–${row.toS} | ${fmtInt(row.ackedSamplesPerS)} | ${fmtMs(row.pubackP99MaxMs)} | ${row.fleetP50Ms ?? '–'} / ${row.fleetP95Ms ?? '–'} / ${row.fleetP99Ms ?? '–'} | ${row.fleetRequests}${row.fleetErrors ? ` (${row.fleetErrors} failed)` : ''} | ${row.streamsOpenMin} | ${fmtInt(row.streamEvents)} | ${row.serviceRssMinMB}–${row.serviceRssMaxMB} | ${row.serviceHeapUsedMB ?? '–'} | ${row.serviceKeptMB ?? '–'} | ${row.serviceCpuPct} / ${row.postgresCpuPct} / ${row.publishersCpuPct} / ${row.usersCpuPct} / ${row.otherPct} |`,
    );
  }
  lines.push('');
  if (mem.liveHeap?.length) {
    lines.push('What the service keeps, after a full garbage collection forced through its inspector:');
    lines.push('');
    lines.push('| t (s) | JS heap MB | external MB | of which ArrayBuffers MB | RSS MB | collection and read, ms |');
    lines.push('| ---: | ---: | ---: | ---: | ---: | ---: |');
    for (const h of mem.liveHeap as (LiveHeap & { tS: number })[]) {
      lines.push(`| ${Math.round(h.tS)} | ${h.heapUsedMB} | ${h.externalMB} | ${h.arrayBuffersMB} | ${h.rssMB} | ${fmtInt(h.pauseMs)} |`);
    }
    lines.push('');
  }
  if (r.postgresStatements.length) {
    lines.push('PostgreSQL statements by total time (pg_stat_statements, during the run):');
    lines.push('');
    lines.push('| total ms | calls | mean ms | statement |');
    lines.push('| ---: | ---: | ---: | --- |');
    for (const q of r.postgresStatements.slice(0, 6)) lines.push(`| ${fmtInt(q.totalMs)} | ${fmtInt(q.calls)} | ${q.meanMs} | \`${q.query.replace(/\|/g, '\\|')}\` |`);
    lines.push('');
  }
  const kinds = Object.entries(r.api.errorKinds as Record<string, number>);
  if (kinds.length) {
    lines.push(`Dashboard users' errors: ${kinds.map(([k, v]) => `${k} (${v})`).join('; ')}.`);
    lines.push('');
  }
  return lines.join('\n') + '\n';
}

if (process.argv.includes(USERS_FLAG)) {
  runDashboardUsers();
} else {
  main().catch((err) => {
    console.error(`[bench] failed: ${(err as Error).stack ?? err}`);
    cleanupNow();
    process.exit(1);
  });
}

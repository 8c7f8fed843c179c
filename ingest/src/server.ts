// Assembles the service: database, pipeline, broker, HTTP. One process holds all.
import { randomBytes } from 'node:crypto';
import fs from 'node:fs';
import http from 'node:http';
import type { Knex } from 'knex';
import pg from 'pg';
import { AuthService } from './auth/auth-service';
import { createPassport } from './auth/passport-setup';
import { RefreshTokensRepository } from './auth/refresh-tokens-repository';
import { apiRoutes } from './http/api-routes';
import { UsersRepository } from './auth/users-repository';
import { startBroker, type EmbeddedBroker } from './broker/broker';
import { startExternalSubscriber, type ExternalSubscriber } from './broker/external-subscriber';
import { PartitionClaims, UnitPartitions } from './broker/partition-claims';
import { systemClock, type Clock } from './clock';
import type { Config } from './config';
import { createKnex } from './db/knex';
import { ServiceEvents } from './events';
import { HealthService } from './health/health-service';
import { createApp } from './http/app';
import type { Logger } from './logger';
import { createMetrics, type Metrics } from './metrics';
import type { RuleName } from './pipeline/alert-rules';
import { BatchWriter } from './pipeline/batch-writer';
import { CheckpointLoader } from './pipeline/checkpoint-loader';
import { EstimatorRegistry } from './pipeline/estimator-registry';
import { IngestPipeline } from './pipeline/ingest-pipeline';
import { PartitionManager } from './pipeline/partitions';
import { ackRouter } from './notify/ack-router';
import { Dispatcher } from './notify/dispatcher';
import { Notifier } from './notify/notifier';
import { NotifyRepository } from './notify/notify-repository';

export interface RunningService {
  knex: Knex;
  broker: EmbeddedBroker | null;
  pipeline: IngestPipeline;
  events: ServiceEvents;
  metrics: Metrics;
  httpPort: number;
  notifier: Notifier | null;
  dispatcher: Dispatcher | null;
  stop(): Promise<void>;
}

export async function startService(config: Config, logger: Logger, clock: Clock = systemClock): Promise<RunningService> {
  const knex = createKnex(config.database.url, config.database.poolMax);
  const pool = new pg.Pool({ connectionString: config.database.url, max: 4, connectionTimeoutMillis: 5000 });
  pool.on('error', (err) => logger.warn({ err: err.message }, 'idle database connection failed'));
  const metrics = createMetrics();
  const events = new ServiceEvents();

  const writer = new BatchWriter({
    pool,
    logger,
    maxBatchSamples: config.ingest.maxBatchSamples,
    lanes: config.ingest.writeLanes,
    // An external broker hands over one message per commit (see external-subscriber.ts): do not linger.
    lingerMs: config.mqtt.external ? 0 : 20,
    onCommitted: ({ samples, ms: took, phases }) => {
      if (samples > 0) metrics.batchSamples.observe(samples);
      metrics.batchSeconds.observe(took / 1000);
      for (const [phase, ms] of Object.entries(phases)) metrics.commitPhaseSeconds.inc({ phase }, ms / 1000);
    },
  });
  const registry = new EstimatorRegistry(knex);
  const partitioned = config.mqtt.external !== null && config.partitions.claimed;
  const unitPartitions = partitioned ? new UnitPartitions(knex) : null;
  const checkpoints = new CheckpointLoader(knex);
  const pipeline = new IngestPipeline(
    {
      registry,
      writer,
      clock,
      logger,
      metrics,
      events,
      loadCheckpoint: (estimatorId) => checkpoints.load(estimatorId),
      storedAfter: (estimatorId, seq) => checkpoints.storedAfter(estimatorId, seq),
      // Partitioned workers: a message on a partition that is not its unit's is quarantined (wrong_partition).
      partitionOf: unitPartitions ? (unitKey) => unitPartitions.of(unitKey) : undefined,
      async unitIdOf(unitKey) {
        const u = await knex('units').where({ key: unitKey }).first('id');
        return u ? Number(u.id) : null;
      },
    },
    {
      alertHoldMs: config.ingest.alertHoldMs,
      statusEveryMs: config.ingest.statusEveryMs,
      silenceFactor: config.ingest.silenceFactor,
      silenceFloorMs: config.ingest.silenceFloorMs,
      maxAgeMs: config.ingest.retentionDays * 86_400_000,
      alertPValue: config.ingest.alertPValue,
      unitSamplesPerSecond: config.ingest.unitSamplesPerSecond,
      unitBurstSamples: config.ingest.unitBurstSamples,
      monitor: {
        windowLength: config.ingest.windowLength,
        alpha: config.ingest.alpha,
        alphaMarginal: config.ingest.alphaMarginal,
        arl0: config.ingest.cusumArl0,
      },
    },
  );

  const timers: NodeJS.Timeout[] = [];
  const partitions = new PartitionManager();
  try {
    const count = await registry.loadAll();
    logger.info({ estimators: count }, 'estimator registry loaded');
    // Partitioned workers do this per partition, when they claim it (partition-claims.ts).
    if (!partitioned) {
      // Live alerts from before a restart: the rules pick them up so they clear in time.
      const live = await knex('alerts').whereNot({ state: 'resolved' }).whereNotNull('estimator_id').select('estimator_id', 'rule', 'opened_at');
      const byId = new Map([...registry.all()].map((e) => [e.id, e]));
      for (const a of live) {
        const info = byId.get(Number(a.estimator_id));
        if (info) await pipeline.adoptLiveAlert(info, a.rule as RuleName, new Date(a.opened_at).getTime());
      }
      // Estimators seen before the restart are watched for silence from now on.
      const seen = await knex('estimator_status').whereNotNull('last_received_at').pluck('estimator_id');
      for (const id of seen) {
        const info = byId.get(Number(id));
        if (info) await pipeline.watch(info);
      }
    }
  } catch (err) {
    // The database may be down at start; the service still starts and says so on /api/health.
    logger.error({ err: (err as Error).message }, 'could not load the fleet from the database at start');
  }

  let broker: EmbeddedBroker | null = null;
  if (config.mqtt.enabled) {
    broker = await startBroker({
      host: config.mqtt.host,
      port: config.mqtt.port,
      tls: config.mqtt.tls
        ? { cert: fs.readFileSync(config.mqtt.tls.certFile), key: fs.readFileSync(config.mqtt.tls.keyFile) }
        : null,
      knex,
      logger,
      handle: (unit, estimator, topic, payload) => pipeline.handle(unit, estimator, topic, payload),
      backlog: () => writer.pendingSamples(),
      maxBacklog: config.ingest.maxQueuedSamples,
      onRefused: (reason) => metrics.refused.inc({ reason }),
      maxPacketBytes: config.mqtt.maxPacketBytes,
      connectsPerMinute: config.mqtt.connectsPerMinute,
      onHeld: () => metrics.held.inc(),
      onTaken: (seconds) => metrics.messageSeconds.observe(seconds),
    });
  }

  const every = (periodMs: number, what: string, fn: () => Promise<unknown>) => {
    let running = false;
    const t = setInterval(() => {
      if (running) return;
      running = true;
      fn()
        .catch((err: Error) => logger.error({ err: err.message }, `${what} failed`))
        .finally(() => (running = false));
    }, periodMs);
    t.unref();
    timers.push(t);
  };
  every(config.ingest.sweepEveryMs, 'sweep', () => pipeline.sweep());
  // The fleet's checkpoints in one-second slices, each estimator about once per checkpoint period.
  const checkpointSliceMs = Math.min(1000, config.ingest.checkpointEveryMs);
  every(checkpointSliceMs, 'checkpoint', () =>
    pipeline.checkpoint(Math.max(1, Math.ceil((pipeline.streamCount() * checkpointSliceMs) / config.ingest.checkpointEveryMs))),
  );
  every(3_600_000, 'retention', () => dropExpired());
  every(1000, 'queue gauge', async () => metrics.queueDepth.set(writer.pendingSamples()));
  const dropExpired = async () => {
    const dropped = await partitions.dropExpired(pool, clock.now(), config.ingest.retentionDays);
    const rollupCutoff = new Date(clock.now() - config.ingest.rollupRetentionDays * 86_400_000);
    const rollups = await knex('estimator_rollups_minute').where('minute', '<', rollupCutoff).delete();
    if (dropped.length > 0 || rollups > 0) logger.info({ dropped, rollups }, 'retention applied');
  };
  void dropExpired().catch((err: Error) => logger.warn({ err: err.message }, 'retention failed at start'));

  let external: ExternalSubscriber | null = null;
  let claims: PartitionClaims | null = null;
  if (config.mqtt.external && unitPartitions) {
    claims = new PartitionClaims({
      databaseUrl: config.database.url,
      partitions: config.partitions.count,
      workerId: config.partitions.workerId,
      clientIdPrefix: config.partitions.clientIdPrefix,
      mqtt: { url: config.mqtt.external.url, username: config.mqtt.external.username, password: config.mqtt.external.password },
      knex,
      pipeline,
      registry,
      units: unitPartitions,
      logger,
      metrics,
      clock,
    });
    claims.start();
  } else if (config.mqtt.external) {
    external = startExternalSubscriber({
      ...config.mqtt.external,
      logger,
      handle: (unit, estimator, topic, payload) => pipeline.handle(unit, estimator, topic, payload),
    });
  }

  const health = new HealthService(knex, () => broker ?? external ?? claims, config.healthTimeoutMs, () => ({
    writeQueueSamples: writer.pendingSamples(),
    writesFailing: writer.isFailing(),
    estimatorsStreaming: pipeline.streamCount(),
  }), clock);
  const secret = config.auth.jwtSecret ?? randomBytes(32).toString('base64url');
  if (!config.auth.jwtSecret) logger.info('no WHITECAP_JWT_SECRET set: using a random signing key for this run');
  const users = new UsersRepository(knex);
  const auth = new AuthService(users, new RefreshTokensRepository(knex), {
    secret,
    accessTtlSeconds: config.auth.accessTokenTtlSeconds,
    refreshTtlSeconds: config.auth.refreshTokenTtlSeconds,
    lockAfterFailures: config.auth.lockAfterFailures,
    lockMs: config.auth.lockMs,
  });
  const passport = createPassport(auth, users, secret);
  const routes = apiRoutes(knex, events, clock, {
    windowLength: config.ingest.windowLength,
    alpha: config.ingest.alpha,
    alphaMarginal: config.ingest.alphaMarginal,
    lags: 10,
    arl0: config.ingest.cusumArl0,
    fleetCacheMs: config.http.fleetCacheMs,
  });
  // The notification side: who is on watch, pages and handoffs, webhooks, the outbox.
  const notifyRepo = new NotifyRepository(knex);
  const linkSecret = config.notify.linkSecret ?? secret;
  let notifier: Notifier | null = null;
  let dispatcher: Dispatcher | null = null;
  if (config.notify.enabled) {
    notifier = new Notifier(
      { repo: notifyRepo, events, clock, logger },
      { baseUrl: config.http.publicUrl, linkSecret, ackLinkTtlMs: config.notify.ackLinkTtlMs, stormWindowMs: config.notify.stormWindowMs },
    );
    notifier.start();
    dispatcher = new Dispatcher(notifyRepo, logger, {
      smtp: config.notify.smtp,
      mailFrom: config.notify.mailFrom,
      maxAttempts: config.notify.maxAttempts,
      webhookTimeoutMs: config.notify.webhookTimeoutMs,
      retryMaxMs: config.notify.retryMaxMs,
    }, clock);
    const requeued = await notifyRepo.requeueSending().catch(() => 0);
    if (requeued > 0) logger.info({ requeued }, 'deliveries left sending by the last run are queued again');
    const n = notifier;
    const d = dispatcher;
    every(config.notify.sweepEveryMs, 'notification sweep', () => n.sweep());
    every(config.notify.dispatchEveryMs, 'delivery', () => d.runOnce());
  }
  const app = createApp({
    logger,
    publicRouters: [{ path: '/acknowledgements', router: ackRouter({ knex, repo: notifyRepo, events, clock, linkSecret }) }],
    health,
    auth,
    passport,
    authOptions: { secureCookies: config.http.publicUrl.startsWith('https:'), signInPerMinute: config.auth.signInPerMinute },
    metrics,
    routes,
    publicUrl: config.http.publicUrl,
    dashboardDir: config.dashboardDir,
  });
  const server = http.createServer(app);
  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(config.http.port, config.http.host, () => {
      server.off('error', reject);
      resolve();
    });
  });
  const address = server.address();
  const httpPort = typeof address === 'object' && address ? address.port : config.http.port;
  logger.info({ url: `http://${config.http.host}:${httpPort}` }, 'HTTP server listening');

  return {
    knex,
    broker,
    pipeline,
    notifier,
    dispatcher,
    events,
    metrics,
    httpPort,
    async stop() {
      for (const t of timers) clearInterval(t);
      // Stop taking messages first, then store what was taken, then checkpoint.
      if (broker) await broker.close();
      if (external) await external.close();
      // Each partition: its connection closed, its checkpoints committed, then its lock released.
      if (claims) await claims.stop();
      await pipeline.sweep().catch(() => undefined);
      await pipeline.checkpoint().catch(() => undefined);
      await writer.close();
      if (notifier) await notifier.stop().catch((err: Error) => logger.warn({ err: err.message }, 'notifications not flushed'));
      if (dispatcher) {
        await dispatcher.runOnce(200).catch(() => undefined);
        dispatcher.close();
      }
      await new Promise<void>((resolve) => {
        server.close(() => resolve());
        server.closeAllConnections();
      });
      await pool.end();
      await knex.destroy();
    },
  };
}

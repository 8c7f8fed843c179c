// The web API's shapes, shared by the service (ingest/) and the dashboard. Times are
// RFC 3339 strings; ids are numbers. Errors are problem+json (RFC 9457):
// { type, title, status, detail?, instance, errors? }.

export type Role = 'viewer' | 'responder' | 'designer' | 'admin';
export type EstimatorVerdict = 'consistent' | 'marginal' | 'inconsistent' | 'silent';
export type AlertState = 'open' | 'acknowledged' | 'resolved';
export type AlertSeverity = 'info' | 'warning' | 'critical';

/** What each role may do; the service checks these on every route. */
export const ROLE_ABILITIES = {
  /** Read the fleet, estimators, series, alerts. */
  read: ['viewer', 'responder', 'designer', 'admin'],
  /** Acknowledge, annotate and resolve alerts. */
  respond: ['responder', 'admin'],
  /** See the quarantine. */
  quarantine: ['designer', 'admin'],
  /** Users, sites, units, estimators, device credentials. */
  administer: ['admin'],
  /** Field residuals, retune studies, draft design revisions. */
  design: ['designer', 'admin'],
} as const satisfies Record<string, readonly Role[]>;
export type Ability = keyof typeof ROLE_ABILITIES;

export function can(role: Role | null | undefined, ability: Ability): boolean {
  return !!role && (ROLE_ABILITIES[ability] as readonly Role[]).includes(role);
}

export interface User {
  id: number;
  email: string;
  displayName: string;
  role: Role;
  active?: boolean;
  createdAt?: string;
}

/** POST /api/auth/sign-in, POST /api/auth/refresh */
export interface SessionResponse {
  accessToken: string;
  /** Seconds. */
  expiresIn: number;
  user: User;
}

/** Every list answers in this shape. Query: limit (≤ 500), offset, sort, order=asc|desc, plus filters. */
export interface Page<T> {
  total: number;
  limit: number;
  offset: number;
  items: T[];
}

export interface Site {
  id: number;
  key: string;
  name: string;
  timeZone: string;
  units: number;
}

export interface Unit {
  id: number;
  key: string;
  name: string;
  kind: string;
  siteKey: string;
  siteName: string;
  estimators: number;
  credentials: number;
}

/** The window statistics kept per estimator (estimator_status.window). */
export interface WindowSummary {
  verdict: 'consistent' | 'marginal' | 'inconsistent';
  reasons: string[];
  samples: number;
  pValue: number;
  m: number | null;
  nis: {
    ready: boolean;
    /** Windowed mean NIS; a consistent filter has expected = m. */
    average: number;
    expected: number | null;
    averageBounds: { lower: number; upper: number };
    pValue: number;
    exceedanceRate: number;
    expectedExceedanceRate: number;
  } | null;
  /** CUSUM statistics as fractions of their thresholds (≥ 1 means a signal). */
  cusum: { up: number; down: number } | null;
  whiteness: { ready: boolean; q: number; pValue: number } | null;
  bias: { ready: boolean; pValue: number } | null;
  sequence: { lost: number; duplicates: number; late: number } | null;
}

/** One row of the fleet overview. GET /api/fleet?site=&design=&verdict=&q=&sort=&order=&limit=&offset= */
export interface FleetEstimator {
  id: number;
  key: string;
  unitKey: string;
  unitName: string;
  siteKey: string;
  siteName: string;
  designKey: string;
  designName: string;
  revision: number;
  measurementDim: number;
  verdict: EstimatorVerdict;
  verdictSince: string | null;
  lastSampleAt: string | null;
  /** Milliseconds since the last sample arrived, at `generatedAt`. */
  lastSampleAgeMs: number | null;
  samplesTotal: number;
  window: WindowSummary | null;
  openAlerts: number;
  worstOpenSeverity: AlertSeverity | null;
}

export interface FleetResponse extends Page<FleetEstimator> {
  generatedAt: string;
  /** Estimators by verdict, over the whole fleet (not only this page). */
  counts: Record<EstimatorVerdict, number>;
  liveAlerts: Record<AlertSeverity, number>;
  /** Fleet-wide false discovery control: estimators whose window p-value survives Benjamini–Hochberg at q. */
  discoveries: { q: number; estimatorIds: number[] };
}

/** GET /api/fleet/heatmap?from=&to=&buckets=: windowed mean NIS / m per estimator and time bucket, from minute rollups. */
export interface FleetHeatmap {
  from: string;
  to: string;
  bucketMs: number;
  /** Bucket start times. */
  times: string[];
  rows: { estimatorId: number; label: string; verdict: EstimatorVerdict; values: (number | null)[] }[];
}

/** GET /api/estimators?unit=&site=&q= (administration lists) */
export interface EstimatorListItem {
  id: number;
  key: string;
  unitKey: string;
  siteKey: string;
  designKey: string;
  revision: number;
  measurementDim: number;
  expectedIntervalMs: number;
}

/** GET /api/designs: every design with its revisions. */
export interface DesignSummary {
  id: number;
  key: string;
  name: string;
  description: string;
  revisions: { id: number; revision: number; status: 'draft' | 'released' | 'retired'; stateDim: number; measurementDim: number; estimators: number; createdAt: string }[];
}

export interface DesignRevisionRef {
  id: number;
  designKey: string;
  designName: string;
  revision: number;
  status: 'draft' | 'released' | 'retired';
}

/** GET /api/estimators/:id */
export interface EstimatorDetail extends FleetEstimator {
  expectedIntervalMs: number;
  design: DesignRevisionRef;
  /** The checks' settings, for drawing bounds. */
  checks: { windowLength: number; alpha: number; alphaMarginal: number; lags: number };
}

/**
 * GET /api/estimators/:id/series?from=&to=&points= (points ≤ 2000, default 1000).
 * Down-sampled on the server: each point is one time bucket with the NIS extremes kept.
 */
export interface EstimatorSeries {
  from: string;
  to: string;
  bucketMs: number;
  samples: number;
  m: number;
  points: {
    t: string;
    count: number;
    nisMin: number;
    nisMax: number;
    nisMean: number;
    cusumUp: number;
    cusumDown: number;
  }[];
  /** The chi-square acceptance band of one NIS value at alpha (two-sided), and of the window mean. */
  band: { alpha: number; lower: number; upper: number; windowLength: number; windowLower: number; windowUpper: number };
  /** CUSUM thresholds the trace is drawn against. */
  cusumThreshold: { up: number; down: number } | null;
  /** Whitened innovations over the range: a histogram per component (standard normal if consistent). */
  histogram: { edges: number[]; counts: number[][] };
  /** Sample autocorrelation of the whitened innovations over the range, per component, with ±bound. */
  autocorrelation: { lags: number[]; values: number[][]; bound: number };
  /** Mean of each whitened component over the range, with its ±bound at alpha. */
  bias: { mean: number[]; bound: number };
}

export interface AlertListItem {
  id: number;
  rule: string;
  severity: AlertSeverity;
  state: AlertState;
  summary: string;
  openedAt: string;
  lastEvidenceAt: string;
  acknowledgedAt: string | null;
  acknowledgedBy: string | null;
  resolvedAt: string | null;
  estimatorId: number | null;
  estimatorKey: string | null;
  unitKey: string | null;
  siteKey: string | null;
}

/** GET /api/alerts?state=open|acknowledged|resolved|live&severity=&rule=&site=&estimatorId=&q=&sort=&order=&limit=&offset= */
export type AlertList = Page<AlertListItem>;

export interface AlertEvent {
  id: number;
  at: string;
  kind: 'opened' | 'cleared' | 'acknowledged' | 'note' | 'resolved' | string;
  actor: string | null;
  note: string | null;
  data: unknown;
}

/** GET /api/alerts/:id */
export interface AlertDetail extends AlertListItem {
  /** The statistic, its bounds or p-value, the window: whatever the rule saw. */
  evidence: Record<string, unknown>;
  events: AlertEvent[];
}

/** POST /api/alerts/:id/acknowledge {note?}, /notes {text}, /resolve {note?} → AlertDetail */
export interface AlertActionBody {
  note?: string;
  text?: string;
}

/** GET /api/quarantine?unit=&reason=&q=&limit=&offset= */
export interface QuarantineItem {
  id: number;
  receivedAt: string;
  unitKey: string | null;
  estimatorKey: string | null;
  topic: string;
  reasonCode: string;
  reason: string;
  payloadBytes: number;
  /** The first bytes of the payload as text (UTF-8, replacement characters where not). */
  payloadPreview: string;
  sampleIndex: number | null;
}

/** GET /api/quarantine/summary?hours=24: how often, by unit and reason. */
export interface QuarantineSummary {
  since: string;
  rows: { unitKey: string | null; reasonCode: string; count: number; lastAt: string }[];
}

/**
 * GET /api/events: server-sent events (text/event-stream), bearer-authenticated.
 * event: verdict  data: VerdictChange
 * event: alert    data: AlertChange
 * A comment line (": keep-alive") every 15 s.
 */
export interface VerdictChange {
  estimatorId: number;
  verdict: EstimatorVerdict;
  previous: EstimatorVerdict;
  at: string;
}

export interface AlertChange {
  alertId: number | null;
  kind: 'open' | 'clear' | 'acknowledged' | 'note' | 'resolved';
  estimatorId: number | null;
  rule: string;
  severity?: AlertSeverity;
  summary?: string;
  at: string;
}

// ---------------------------------------------------------------------------
// Notifications: the watch rota, notification rules, webhooks, deliveries, and the
// acknowledge link sent by e-mail. Times are ISO 8601 strings.

export interface PersonRef {
  userId: number;
  displayName: string;
}

/** Whole fleet, or one site. */
export type RotaScopeRef = { kind: 'fleet' } | { kind: 'site'; siteId: number; siteName: string };

export interface RotaShiftRef extends PersonRef {
  /** ISO weekday, Monday = 1 … Sunday = 7. */
  weekday: number;
  /** Local handover time in the rota's time zone, 'HH:MM'. */
  handover: string;
}

export interface RotaOverrideRef extends PersonRef {
  id: number;
  from: string;
  to: string;
  note: string | null;
}

export interface RotaSummary {
  id: number;
  name: string;
  scope: RotaScopeRef;
  /** IANA time zone the weekly handover times are in. */
  timeZone: string;
  shifts: RotaShiftRef[];
  /** Next in line after whoever is on watch, in order. */
  backups: PersonRef[];
  overrides: RotaOverrideRef[];
  /** Who is on watch now (null when the rota has nobody). */
  onWatch: (PersonRef & { since: string | null; until: string | null; source: 'weekly' | 'override' }) | null;
  /** The next handovers (at most 5). */
  next: (PersonRef & { at: string })[];
  /** Who is paged, in order: on watch, then the backups. */
  handoffChain: PersonRef[];
}

/** Create or replace a rota. siteId null: the whole fleet. */
export interface RotaInput {
  name: string;
  siteId: number | null;
  timeZone: string;
  shifts: { weekday: number; handover: string; userId: number }[];
  backups: number[];
}

export interface RotaOverrideInput {
  from: string;
  to: string;
  userId: number;
  note?: string;
}

/** What happens with alerts of one severity. */
export interface NotificationRule {
  severity: AlertSeverity;
  /** Page whoever is on watch (otherwise the alert only shows on the dashboard). */
  pages: boolean;
  /** Hand off to the next person in line when not acknowledged within this time. */
  handoffAfterMinutes: number;
  /** Quiet hours in the rota's time zone ('HH:MM'), when this severity does not page; both null for none. */
  quietFrom: string | null;
  quietTo: string | null;
}

export interface WebhookEndpoint {
  id: number;
  url: string;
  description: string;
  active: boolean;
  createdAt: string;
  /** The last 4 characters of the signing secret. */
  secretHint: string;
}

/** Returned once, when an endpoint is registered or its secret rotated. */
export interface WebhookEndpointWithSecret extends WebhookEndpoint {
  secret: string;
}

export type DeliveryStatus = 'pending' | 'sent' | 'failed';

export interface Delivery {
  id: number;
  channel: 'email' | 'webhook';
  /** E-mail address, or the webhook's URL. */
  target: string;
  /** E-mail subject, or the webhook event type. */
  subject: string;
  status: DeliveryStatus;
  attempts: number;
  lastError: string | null;
  createdAt: string;
  sentAt: string | null;
  nextAttemptAt: string | null;
  alertIds: number[];
}

export type DeliveryList = Page<Delivery>;

/** What the public acknowledge page shows for a link from an e-mail. */
export interface AcknowledgeLinkInfo {
  alert: { id: number; rule: string; severity: AlertSeverity; summary: string; unitKey: string | null; estimatorKey: string | null; openedAt: string; state: AlertState };
  recipient: string;
  expiresAt: string;
  /** False when the link was used already, has expired, or the alert is no longer open. */
  usable: boolean;
  reason: 'used' | 'expired' | 'not-open' | null;
}

export interface AcknowledgeLinkResult {
  alertId: number;
  acknowledgedBy: string;
  acknowledgedAt: string;
}

// ---------------------------------------------------------------------------
// Designer's workbench: retune studies. Matrices are row-major number[][].

export interface ComplexNumber {
  re: number;
  im: number;
}

export interface StudyRequest {
  /** The estimators whose residuals to use; or all estimators on one design revision (a cohort). */
  estimatorIds?: number[];
  designRevisionId?: number;
  /** Residual uploads (all on one design revision) to use, each as one or more unbroken runs; the window does not apply to them. */
  uploadIds?: number[];
  /** The window, ISO 8601. */
  from: string;
  to: string;
  /** Autocovariance lags (default 15). */
  lags?: number;
  estimateQ?: 'diagonal' | 'full';
  estimateR?: 'diagonal' | 'full';
  /** Regulator gain K (u = −K x̂) to check the closed loop with; else the design's own K if it has one. */
  regulatorK?: number[][];
  /** Margin floors for the warnings (defaults 6 dB, 30°, disk α 0.4). */
  marginFloor?: { gainDb?: number; phaseDeg?: number; diskAlpha?: number };
  title?: string;
}

export interface StudyFilter {
  /** One-step predictor gain L (x̂ₖ₊₁ = A x̂ₖ + L(yₖ − C x̂ₖ)). */
  L: number[][];
  /** Innovation covariance the filter predicts, C P Cᵀ + R. */
  S: number[][];
  poles: ComplexNumber[];
}

export interface StudyMargins {
  closedLoopStable: boolean;
  /** null: unlimited, or not meaningful (closed loop unstable). */
  gainMarginUpperDb: number | null;
  gainMarginLowerDb: number | null;
  phaseMarginDeg: number | null;
  diskAlpha: number | null;
  /** For the Bode plot. */
  sweep: { omega: number[]; magnitudeDb: number[]; phaseDeg: number[] };
}

export interface RetuneStudy {
  id: number;
  title: string;
  createdAt: string;
  createdBy: string;
  request: StudyRequest;
  design: { designId: number; designKey: string; revisionId: number; revision: number; stateDim: number; measurementDim: number };
  estimators: { id: number; unitKey: string; key: string; samples: number }[];
  /** Residual uploads the study used (absent on studies of field data alone). */
  uploads?: { id: number; name: string; samples: number }[];
  samples: number;
  assumed: { Q: number[][]; R: number[][] };
  estimated: {
    Q: number[][];
    R: number[][];
    /** Per-entry bootstrap intervals (lo, hi) when computed. */
    intervals: { Q: [number, number][][]; R: [number, number][][] } | null;
    identifiable: { Q: boolean; R: boolean; reason: string };
    rank: number;
    unknowns: number;
    condition: number;
  };
  /** NIS mean / m: observed in the data; predicted for the current filter under the estimated noise; for the proposed filter (1 by construction). */
  nis: { observed: number; predictedCurrent: number; predictedProposed: number; m: number };
  current: StudyFilter;
  proposed: StudyFilter;
  /** With a regulator gain: the combined loop and the margins at the plant input before and after. */
  loop: {
    K: number[][];
    separation: { agree: boolean; largestMismatch: number; combinedPoles: ComplexNumber[] };
    marginsCurrent: StudyMargins;
    marginsProposed: StudyMargins;
    warnings: string[];
  } | null;
  autocovariance: { lags: number[]; estimated: number[]; fitted: number[] };
  /** Plain-language notes: identifiability, too few samples, and the like. */
  notes: string[];
  /** Whitecap's results are advisory (shown on the study and the report). */
  caution: string;
  draftRevisionId: number | null;
}

export interface StudyListItem {
  id: number;
  title: string;
  createdAt: string;
  createdBy: string;
  designKey: string;
  revision: number;
  samples: number;
  draftRevisionId: number | null;
}

/** A logged innovation file a designer uploaded (POST /api/residual-uploads, text/csv). */
export interface ResidualUpload {
  id: number;
  name: string;
  designRevisionId: number;
  designKey: string;
  revision: number;
  measurementDim: number;
  createdAt: string;
  createdBy: string;
  rowsAccepted: number;
  rowsRejected: number;
}

/** What an upload answers (201): the counts and the first 100 rejected rows with their reasons. */
export interface UploadReport {
  id: number;
  rowsAccepted: number;
  rowsRejected: number;
  rejected: { line: number; reason: string }[];
}

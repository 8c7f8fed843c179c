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

// Which estimators exist: (unit key, estimator key) → the estimator's ids and shape.
// Loaded at start; a miss asks the database once (new estimators are picked up),
// and an unknown key is remembered for a short while so a misconfigured unit cannot
// turn every message into a query.
import type { Knex } from 'knex';
import { ExpiringKeys } from './expiring-keys';

export interface EstimatorInfo {
  id: number;
  unitId: number;
  unitKey: string;
  key: string;
  siteId: number;
  measurementDim: number;
  expectedIntervalMs: number;
  designRevisionId: number;
}

const UNKNOWN_TTL_MS = 30_000;
/** Unknown estimators remembered at most (a unit inventing keys cannot grow memory past this). */
const UNKNOWN_MAX = 10_000;

export class EstimatorRegistry {
  private readonly byKey = new Map<string, EstimatorInfo>();
  private readonly unknown = new ExpiringKeys(UNKNOWN_TTL_MS, UNKNOWN_MAX);

  constructor(private readonly knex: Knex) {}

  private query() {
    return this.knex('estimators as e')
      .join('units as u', 'u.id', 'e.unit_id')
      .select<Record<string, unknown>[]>(
        'e.id',
        'e.unit_id',
        'u.key as unit_key',
        'e.key',
        'u.site_id',
        'e.measurement_dim',
        'e.expected_interval_ms',
        'e.design_revision_id',
      );
  }

  private static toInfo(r: Record<string, unknown>): EstimatorInfo {
    return {
      id: Number(r.id),
      unitId: Number(r.unit_id),
      unitKey: String(r.unit_key),
      key: String(r.key),
      siteId: Number(r.site_id),
      measurementDim: Number(r.measurement_dim),
      expectedIntervalMs: Number(r.expected_interval_ms),
      designRevisionId: Number(r.design_revision_id),
    };
  }

  async loadAll(): Promise<number> {
    const rows = await this.query();
    for (const r of rows) {
      const info = EstimatorRegistry.toInfo(r);
      this.byKey.set(`${info.unitKey}/${info.key}`, info);
    }
    return rows.length;
  }

  all(): IterableIterator<EstimatorInfo> {
    return this.byKey.values();
  }

  /** The estimator, from memory when known; undefined when it does not exist. */
  async find(unitKey: string, estimatorKey: string, nowMs: number): Promise<EstimatorInfo | undefined> {
    const key = `${unitKey}/${estimatorKey}`;
    const hit = this.byKey.get(key);
    if (hit) return hit;
    if (this.unknown.has(key, nowMs)) return undefined;
    const row = await this.query().where({ 'u.key': unitKey, 'e.key': estimatorKey }).first();
    if (!row) {
      this.unknown.add(key, nowMs);
      return undefined;
    }
    const info = EstimatorRegistry.toInfo(row);
    this.byKey.set(key, info);
    this.unknown.delete(key);
    return info;
  }
}

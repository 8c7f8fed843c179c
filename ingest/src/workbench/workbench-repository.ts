// The workbench's queries: estimators and their design revisions, innovation samples
// read through a server-side cursor (pg-query-stream on a connection of the Knex pool),
// retune studies and the draft revisions made from them. Bindings only.
import type { Knex } from 'knex';
import type { PoolClient } from 'pg';
import QueryStream from 'pg-query-stream';

export interface EstimatorRow {
  id: number;
  key: string;
  unitKey: string;
  designRevisionId: number;
  measurementDim: number;
}

export interface RevisionRow {
  id: number;
  designId: number;
  designKey: string;
  revision: number;
  status: 'draft' | 'released' | 'retired';
  stateDim: number;
  measurementDim: number;
  model: Record<string, unknown>;
}

export interface StudyRow {
  id: number;
  title: string;
  created_at: Date;
  created_by_name: string | null;
  request: unknown;
  result: Record<string, unknown>;
  design_revision_id: number;
  draft_revision_id: number | null;
}

export interface StudyListRow {
  id: number;
  title: string;
  createdAt: string;
  createdBy: string;
  designKey: string;
  revision: number;
  samples: number;
  draftRevisionId: number | null;
}

/** A query's rows as a readable stream (a server-side cursor); `release` gives the connection back. */
export interface CursorStream {
  rows: QueryStream;
  release: () => Promise<void>;
}

const toEstimator = (r: Record<string, any>): EstimatorRow => ({
  id: Number(r.id),
  key: r.key,
  unitKey: r.unit_key,
  designRevisionId: Number(r.design_revision_id),
  measurementDim: Number(r.measurement_dim),
});

export class WorkbenchRepository {
  constructor(private readonly knex: Knex) {}

  private estimatorBase() {
    return this.knex('estimators as e')
      .join('units as u', 'u.id', 'e.unit_id')
      .select('e.id', 'e.key', 'u.key as unit_key', 'e.design_revision_id', 'e.measurement_dim');
  }

  async estimatorsByIds(ids: readonly number[]): Promise<EstimatorRow[]> {
    return (await this.estimatorBase().whereIn('e.id', ids).orderBy('e.id')).map(toEstimator);
  }

  async estimatorsOnRevision(revisionId: number): Promise<EstimatorRow[]> {
    return (await this.estimatorBase().where('e.design_revision_id', revisionId).orderBy('u.key').orderBy('e.key')).map(toEstimator);
  }

  async revision(id: number, trx: Knex | Knex.Transaction = this.knex): Promise<RevisionRow | null> {
    const r = await trx('design_revisions as r')
      .join('designs as d', 'd.id', 'r.design_id')
      .where('r.id', id)
      .first('r.id', 'r.design_id', 'd.key as design_key', 'r.revision', 'r.status', 'r.state_dim', 'r.measurement_dim', 'r.model');
    if (!r) return null;
    return {
      id: Number(r.id),
      designId: Number(r.design_id),
      designKey: r.design_key,
      revision: Number(r.revision),
      status: r.status,
      stateDim: Number(r.state_dim),
      measurementDim: Number(r.measurement_dim),
      model: r.model,
    };
  }

  /** Samples per estimator in [from, to) from the minute rollups: an estimate (whole minutes) for progress bars. */
  async estimatedSamples(ids: readonly number[], from: Date, to: Date): Promise<number> {
    const row = await this.knex('estimator_rollups_minute')
      .whereIn('estimator_id', ids)
      .where('minute', '>=', new Date(Math.floor(from.getTime() / 60_000) * 60_000))
      .where('minute', '<', to)
      .first(this.knex.raw('coalesce(sum(samples), 0)::bigint as samples'));
    return Number(row?.samples ?? 0);
  }

  /**
   * The export's rows in order of estimator, time and sequence number, as arrays
   * [estimator_id, seq, t (RFC 3339, UTC, ms), nis (text, as stored), nu (bytea)].
   */
  exportCursor(ids: readonly number[], from: Date, to: Date, limit: number | undefined): Promise<CursorStream> {
    const q = this.knex('innovation_samples as s')
      .whereIn('s.estimator_id', ids)
      .where('s.t', '>=', from)
      .where('s.t', '<', to)
      .orderBy([{ column: 's.estimator_id' }, { column: 's.t' }, { column: 's.seq' }])
      .select(
        's.estimator_id',
        's.seq',
        this.knex.raw(`to_char(s.t at time zone 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.MS"Z"') as t`),
        this.knex.raw('s.nis::text as nis'),
        's.nu',
      );
    if (limit !== undefined) q.limit(limit);
    return this.cursor(q);
  }

  /**
   * The newest `limit` samples of the estimators in [from, to), newest first, as arrays
   * [estimator_id, seq, t (epoch ms), nis, nu (bytea)].
   */
  studyCursor(ids: readonly number[], from: Date, to: Date, limit: number): Promise<CursorStream> {
    const q = this.knex('innovation_samples as s')
      .whereIn('s.estimator_id', ids)
      .where('s.t', '>=', from)
      .where('s.t', '<', to)
      .orderBy([
        { column: 's.t', order: 'desc' },
        { column: 's.seq', order: 'desc' },
      ])
      .limit(limit)
      .select('s.estimator_id', 's.seq', this.knex.raw('(extract(epoch from s.t) * 1000)::float8 as t_ms'), 's.nis', 's.nu');
    return this.cursor(q);
  }

  /** Runs a built query through a server-side cursor on a connection borrowed from the pool. */
  private async cursor(q: Knex.QueryBuilder): Promise<CursorStream> {
    const { sql, bindings } = q.toSQL().toNative();
    const connection = (await this.knex.client.acquireConnection()) as PoolClient;
    let rows: QueryStream;
    try {
      rows = connection.query(new QueryStream(sql, bindings as unknown[], { rowMode: 'array', batchSize: 5000, highWaterMark: 5000 }));
    } catch (err) {
      await this.knex.client.releaseConnection(connection);
      throw err;
    }
    let released = false;
    const release = async () => {
      if (released) return;
      released = true;
      // A cursor left open (a client that went away) is closed before the connection goes back.
      if (!rows.closed) {
        const closed = new Promise<void>((resolve) => rows.once('close', () => resolve()));
        if (!rows.destroyed) rows.destroy();
        await closed;
      }
      await this.knex.client.releaseConnection(connection);
    };
    return { rows, release };
  }

  /** Residual uploads by id with their design revision. */
  async uploadsByIds(ids: readonly number[]): Promise<{ id: number; name: string; designRevisionId: number }[]> {
    const rows = await this.knex('residual_uploads').whereIn('id', ids).orderBy('id').select('id', 'name', 'design_revision_id');
    return rows.map((r) => ({ id: Number(r.id), name: r.name, designRevisionId: Number(r.design_revision_id) }));
  }

  /** An upload's samples in sequence order: seq and nu (real[] → numbers). */
  async uploadSamples(uploadId: number): Promise<{ seq: number; nu: number[] }[]> {
    const rows = await this.knex('residual_upload_samples').where('upload_id', uploadId).orderBy('seq').select('seq', 'nu');
    return rows.map((r) => ({ seq: Number(r.seq), nu: (r.nu as (number | string)[]).map(Number) }));
  }

  async insertStudy(s: { title: string; createdBy: number; request: unknown; result: unknown; designRevisionId: number }): Promise<number> {
    const [row] = await this.knex('retune_studies')
      .insert({
        title: s.title,
        created_by: s.createdBy,
        request: JSON.stringify(s.request),
        result: JSON.stringify(s.result),
        design_revision_id: s.designRevisionId,
      })
      .returning('id');
    return Number(row.id);
  }

  async study(id: number, trx: Knex | Knex.Transaction = this.knex, lock = false): Promise<StudyRow | null> {
    const q = trx('retune_studies as s')
      .leftJoin('users as us', 'us.id', 's.created_by')
      .where('s.id', id)
      .first('s.id', 's.title', 's.created_at', 'us.display_name as created_by_name', 's.request', 's.result', 's.design_revision_id', 's.draft_revision_id');
    if (lock) q.forUpdate('s');
    const r = await q;
    if (!r) return null;
    return { ...r, id: Number(r.id), design_revision_id: Number(r.design_revision_id), draft_revision_id: r.draft_revision_id === null ? null : Number(r.draft_revision_id) };
  }

  async listStudies(q: { designRevisionId?: number; limit: number; offset: number }): Promise<StudyListRow[]> {
    const base = this.knex('retune_studies as s')
      .join('design_revisions as r', 'r.id', 's.design_revision_id')
      .join('designs as d', 'd.id', 'r.design_id')
      .leftJoin('users as us', 'us.id', 's.created_by');
    if (q.designRevisionId !== undefined) base.where('s.design_revision_id', q.designRevisionId);
    const rows = await base
      .orderBy('s.created_at', 'desc')
      .orderBy('s.id', 'desc')
      .limit(q.limit)
      .offset(q.offset)
      .select(
        's.id',
        's.title',
        's.created_at',
        'us.display_name as created_by_name',
        'd.key as design_key',
        'r.revision',
        this.knex.raw(`coalesce((s.result->>'samples')::int, 0) as samples`),
        's.draft_revision_id',
      );
    return rows.map((r) => ({
      id: Number(r.id),
      title: r.title,
      createdAt: new Date(r.created_at).toISOString(),
      createdBy: r.created_by_name ?? '(removed user)',
      designKey: r.design_key,
      revision: Number(r.revision),
      samples: Number(r.samples),
      draftRevisionId: r.draft_revision_id === null ? null : Number(r.draft_revision_id),
    }));
  }

  /** Locks the design row (serializing new revision numbers) and returns the next revision number. */
  async nextRevisionNumber(trx: Knex.Transaction, designId: number): Promise<number> {
    await trx('designs').where('id', designId).forUpdate().first('id');
    const row = await trx('design_revisions').where('design_id', designId).max<{ max: number | null }>('revision as max').first();
    return Number(row?.max ?? 0) + 1;
  }

  async insertDraftRevision(
    trx: Knex.Transaction,
    r: { designId: number; revision: number; stateDim: number; measurementDim: number; model: unknown; notes: string },
  ): Promise<number> {
    const [row] = await trx('design_revisions')
      .insert({
        design_id: r.designId,
        revision: r.revision,
        status: 'draft',
        state_dim: r.stateDim,
        measurement_dim: r.measurementDim,
        model: JSON.stringify(r.model),
        notes: r.notes,
      })
      .returning('id');
    return Number(row.id);
  }

  async setDraftRevision(trx: Knex.Transaction, studyId: number, revisionId: number): Promise<void> {
    await trx('retune_studies').where('id', studyId).update({ draft_revision_id: revisionId });
  }
}

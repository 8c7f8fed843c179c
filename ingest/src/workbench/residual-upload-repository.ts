// Residual uploads' queries: the upload row, its samples in batches (unnest), the list. Bindings only.
import type { Knex } from 'knex';
import type { ResidualUpload } from '../../../shared/src/api/api-types';
import type { AcceptedRow } from './residual-upload';

export class ResidualUploadRepository {
  constructor(private readonly knex: Knex) {}

  async insertUpload(trx: Knex.Transaction, u: { name: string; designRevisionId: number; createdBy: number }): Promise<number> {
    const [row] = await trx('residual_uploads').insert({ name: u.name, design_revision_id: u.designRevisionId, created_by: u.createdBy }).returning('id');
    return Number(row.id);
  }

  /** One insert per batch: three parallel arrays unnested into rows. */
  async insertSamples(trx: Knex.Transaction, uploadId: number, rows: readonly AcceptedRow[]): Promise<void> {
    if (!rows.length) return;
    await trx.raw(
      `insert into residual_upload_samples (upload_id, seq, t, nu)
       select ?, x.seq, x.t::timestamptz, x.nu::real[] from unnest(?::int[], ?::text[], ?::text[]) as x(seq, t, nu)`,
      [uploadId, rows.map((r) => r.seq), rows.map((r) => r.t), rows.map((r) => `{${r.nu.join(',')}}`)] as unknown as readonly Knex.RawBinding[],
    );
  }

  async finish(trx: Knex.Transaction, uploadId: number, r: { accepted: number; rejected: number; report: unknown }): Promise<void> {
    await trx('residual_uploads').where('id', uploadId).update({ rows_accepted: r.accepted, rows_rejected: r.rejected, report: JSON.stringify(r.report) });
  }

  async list(q: { designRevisionId?: number; limit: number; offset: number }): Promise<ResidualUpload[]> {
    const base = this.knex('residual_uploads as up')
      .join('design_revisions as r', 'r.id', 'up.design_revision_id')
      .join('designs as d', 'd.id', 'r.design_id')
      .leftJoin('users as us', 'us.id', 'up.created_by');
    if (q.designRevisionId !== undefined) base.where('up.design_revision_id', q.designRevisionId);
    const rows = await base
      .orderBy('up.created_at', 'desc')
      .orderBy('up.id', 'desc')
      .limit(q.limit)
      .offset(q.offset)
      .select('up.id', 'up.name', 'up.design_revision_id', 'd.key as design_key', 'r.revision', 'r.measurement_dim', 'up.created_at', 'us.display_name', 'up.rows_accepted', 'up.rows_rejected');
    return rows.map((r) => ({
      id: Number(r.id),
      name: r.name,
      designRevisionId: Number(r.design_revision_id),
      designKey: r.design_key,
      revision: Number(r.revision),
      measurementDim: Number(r.measurement_dim),
      createdAt: new Date(r.created_at).toISOString(),
      createdBy: r.display_name ?? '(removed user)',
      rowsAccepted: Number(r.rows_accepted),
      rowsRejected: Number(r.rows_rejected),
    }));
  }
}

// The design registry's queries: designs, one revision with its model, status changes.
// New revision numbers and the insert itself are WorkbenchRepository's (shared with the
// drafts made from retune studies). Bindings only.
import type { Knex } from 'knex';
import type { DesignModel } from '../../../shared/src/design/design-validation';

export type RevisionStatus = 'draft' | 'released' | 'retired';

export interface DesignRow {
  id: number;
  key: string;
  name: string;
  description: string;
}

export interface RevisionDetailRow {
  id: number;
  designId: number;
  designKey: string;
  designName: string;
  revision: number;
  status: RevisionStatus;
  stateDim: number;
  measurementDim: number;
  /** As stored: drafts made elsewhere (retune studies) were not necessarily checked like a form's. */
  model: DesignModel;
  notes: string;
  createdAt: string;
  /** Estimators that run this revision. */
  estimators: number;
}

export class DesignRevisionsRepository {
  constructor(private readonly knex: Knex) {}

  async design(id: number, trx: Knex | Knex.Transaction = this.knex): Promise<DesignRow | null> {
    const d = await trx('designs').where('id', id).first('id', 'key', 'name', 'description');
    return d ? { id: Number(d.id), key: d.key, name: d.name, description: d.description } : null;
  }

  /** A new design; null when the key is taken. */
  async insertDesign(d: { key: string; name: string; description: string }): Promise<DesignRow | null> {
    const [row] = await this.knex('designs').insert(d).onConflict('key').ignore().returning(['id', 'key', 'name', 'description']);
    return row ? { id: Number(row.id), key: row.key, name: row.name, description: row.description } : null;
  }

  /** One revision of one design; `lock` takes the row for update (status changes). */
  async revision(designId: number, revisionId: number, trx: Knex | Knex.Transaction = this.knex, lock = false): Promise<RevisionDetailRow | null> {
    const q = trx('design_revisions as r')
      .join('designs as d', 'd.id', 'r.design_id')
      .where({ 'r.id': revisionId, 'r.design_id': designId })
      .first(
        'r.id',
        'r.design_id',
        'd.key as design_key',
        'd.name as design_name',
        'r.revision',
        'r.status',
        'r.state_dim',
        'r.measurement_dim',
        'r.model',
        'r.notes',
        'r.created_at',
        trx.raw('(select count(*)::int from estimators e where e.design_revision_id = r.id) as estimators'),
      );
    if (lock) q.forUpdate('r');
    const r = await q;
    if (!r) return null;
    return {
      id: Number(r.id),
      designId: Number(r.design_id),
      designKey: r.design_key,
      designName: r.design_name,
      revision: Number(r.revision),
      status: r.status,
      stateDim: Number(r.state_dim),
      measurementDim: Number(r.measurement_dim),
      model: r.model,
      notes: r.notes,
      createdAt: new Date(r.created_at).toISOString(),
      estimators: Number(r.estimators),
    };
  }

  async setStatus(trx: Knex.Transaction, revisionId: number, status: RevisionStatus): Promise<void> {
    await trx('design_revisions').where('id', revisionId).update({ status });
  }
}

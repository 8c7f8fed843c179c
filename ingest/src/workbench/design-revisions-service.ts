// The design registry: new designs, new design revisions from a model checked by the
// shared validation (form or uploaded file alike; every problem reported, nothing stored
// unless all is well), one revision with its model, and the release or retirement of a
// revision by an administrator.
import type { Knex } from 'knex';
import type { User } from '../../../shared/src/api/api-types';
import {
  DESIGN_REVISION_CAUTION,
  validateDesignModel,
  type DesignModel,
  type DesignProblem,
} from '../../../shared/src/design/design-validation';
import { HttpProblem } from '../http/problem';
import type { DesignRevisionsRepository, DesignRow, RevisionStatus } from './design-revisions-repository';
import type { WorkbenchRepository } from './workbench-repository';

/** What POST /api/designs/:id/revisions answers (201). */
export interface DesignRevisionCreated {
  id: number;
  designId: number;
  designKey: string;
  /** One more than the highest revision of the design so far. */
  revision: number;
  status: 'draft';
  stateDim: number;
  measurementDim: number;
  /** What the check found that does not stop the revision being saved. */
  warnings: string[];
  caution: string;
}

/** GET /api/designs/:id/revisions/:revisionId */
export interface DesignRevisionDetail {
  id: number;
  designId: number;
  designKey: string;
  designName: string;
  revision: number;
  status: RevisionStatus;
  stateDim: number;
  measurementDim: number;
  model: DesignModel;
  notes: string;
  createdAt: string;
  estimators: number;
  /** The stored model checked again now: a revision made elsewhere may not pass. */
  check: { problems: DesignProblem[]; warnings: string[] };
  caution: string;
}

/** The status changes an administrator may make; a release is final for that revision. */
const ALLOWED: Record<RevisionStatus, RevisionStatus[]> = {
  draft: ['released', 'retired'],
  released: ['retired'],
  retired: [],
};

/** The model's problems as the API's `errors`, with paths into the request body. */
function modelErrors(problems: DesignProblem[]): { where: string; path: string; message: string }[] {
  return problems.map((p) => ({ where: 'body', path: p.path ? `model.${p.path}` : 'model', message: p.message }));
}

function count(n: number, one: string, many: string): string {
  return `${n} ${n === 1 ? one : many}`;
}

export class DesignRevisionsService {
  constructor(
    private readonly knex: Knex,
    private readonly repo: DesignRevisionsRepository,
    private readonly workbench: WorkbenchRepository,
  ) {}

  async createDesign(d: { key: string; name: string; description: string }): Promise<DesignRow & { revisions: [] }> {
    const row = await this.repo.insertDesign(d);
    if (!row) throw new HttpProblem(409, 'design-exists', 'That design key is taken', `There is a design with the key ${d.key} already.`, { errors: [{ where: 'body', path: 'key', message: 'is taken by another design' }] });
    return { ...row, revisions: [] };
  }

  /**
   * Checks the model and stores it as the design's next revision, in one transaction: the
   * design row is locked first, so concurrent saves get consecutive numbers.
   */
  async createRevision(user: User, designId: number, input: { model: unknown; notes: string }): Promise<DesignRevisionCreated> {
    const checked = validateDesignModel(input.model);
    if (!checked.ok) {
      const first = checked.problems[0];
      throw new HttpProblem(
        400,
        'invalid-design-model',
        'The design model has problems',
        `${count(checked.problems.length, 'problem', 'problems')} in the model, nothing saved. First: ${first.path || 'model'}: ${first.message}.`,
        { errors: modelErrors(checked.problems), warnings: checked.warnings },
      );
    }
    return this.knex.transaction(async (trx) => {
      const design = await this.repo.design(designId, trx);
      if (!design) throw new HttpProblem(404, 'not-found', 'No such design', `There is no design ${designId}.`);
      const revision = await this.workbench.nextRevisionNumber(trx, designId);
      // There is no author column: the notes say who saved the revision.
      const written = input.notes.trim();
      const notes = `${written}${written ? '\n\n' : ''}Saved by ${user.displayName}.`;
      const id = await this.workbench.insertDraftRevision(trx, {
        designId,
        revision,
        stateDim: checked.stateDim,
        measurementDim: checked.measurementDim,
        model: checked.model,
        notes,
      });
      return {
        id,
        designId,
        designKey: design.key,
        revision,
        status: 'draft' as const,
        stateDim: checked.stateDim,
        measurementDim: checked.measurementDim,
        warnings: checked.warnings,
        caution: DESIGN_REVISION_CAUTION,
      };
    });
  }

  async revision(designId: number, revisionId: number): Promise<DesignRevisionDetail> {
    const r = await this.repo.revision(designId, revisionId);
    if (!r) throw new HttpProblem(404, 'not-found', 'No such design revision', `Design ${designId} has no revision with id ${revisionId}.`);
    const v = validateDesignModel(r.model);
    return { ...r, check: { problems: v.ok ? [] : v.problems, warnings: v.warnings }, caution: DESIGN_REVISION_CAUTION };
  }

  /** Releases or retires a revision (administrators). A revision is released only from draft, and only once. */
  async changeStatus(designId: number, revisionId: number, status: 'released' | 'retired'): Promise<DesignRevisionDetail> {
    await this.knex.transaction(async (trx) => {
      const r = await this.repo.revision(designId, revisionId, trx, true);
      if (!r) throw new HttpProblem(404, 'not-found', 'No such design revision', `Design ${designId} has no revision with id ${revisionId}.`);
      if (!ALLOWED[r.status].includes(status)) {
        const detail =
          r.status === status
            ? `Revision ${r.revision} of ${r.designKey} is ${status} already.`
            : `Revision ${r.revision} of ${r.designKey} is ${r.status}; it cannot become ${status}` +
              (r.status === 'retired' ? ': a retired revision stays retired.' : ': a released revision can only be retired.');
        throw new HttpProblem(409, 'status-change-refused', 'That status change is not allowed', detail, { status: r.status });
      }
      if (status === 'released') {
        // A draft made from a retune study was stored without the form's check: check it before it can reach a unit.
        const v = validateDesignModel(r.model);
        if (!v.ok) {
          throw new HttpProblem(
            422,
            'design-model-invalid',
            'This revision cannot be released',
            `Its model has ${count(v.problems.length, 'problem', 'problems')}; make a new revision with them fixed.`,
            { errors: v.problems.map((p) => ({ where: 'model', path: p.path, message: p.message })) },
          );
        }
      }
      await this.repo.setStatus(trx, r.id, status);
    });
    return this.revision(designId, revisionId);
  }
}

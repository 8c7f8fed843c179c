// Retune studies: resolve the estimators (explicit ids or a design revision's cohort),
// read their innovations in the window (newest first, capped), cut them into unbroken
// runs, compute the study (retune-analysis.ts), save it; and turn a saved study into a
// draft design revision.
import type { Knex } from 'knex';
import { inverse, Matrix } from 'ml-matrix';
import type { RetuneStudy, StudyRequest, User } from '../../../shared/src/api/api-types';
import { HttpProblem } from '../http/problem';
import { checkModel, retuneNumbers, StudyRefused, type DesignModel } from './retune-analysis';
import type { EstimatorRow, StudyRow, WorkbenchRepository } from './workbench-repository';

/** Shown with every study and its report: Whitecap's results are advisory. */
export const STUDY_CAUTION =
  "Advisory only: these estimates and the proposed gain must be validated in simulation and under your organisation's own safety process before they reach a machine; applicable codes and licensed engineering practice prevail.";

/** At most this many samples (the newest in the window) go into one study. */
export const STUDY_SAMPLE_CAP = 200_000;

const SEQ_MODULUS = 2 ** 31; // units wrap seq to 0 after 2³¹ − 1

/** What POST /api/studies/:id/draft-revision answers (201). */
export interface DraftRevisionCreated {
  /** The new design_revisions id (also the study's draftRevisionId from now on). */
  revisionId: number;
  /** Its revision number within the design: one more than the highest so far. */
  revision: number;
  designKey: string;
  status: 'draft';
  studyId: number;
}

export interface StudySettings {
  sampleCap: number;
}

/** One estimator's samples in time order. */
interface EstimatorSamples {
  seq: number[];
  t: number[];
  nu: Float64Array[];
}

const describe = (e: EstimatorRow) => `${e.unitKey}/${e.key} (id ${e.id})`;

export class StudyService {
  constructor(
    private readonly knex: Knex,
    private readonly repo: WorkbenchRepository,
    private readonly settings: StudySettings = { sampleCap: STUDY_SAMPLE_CAP },
  ) {}

  /** The estimators of a request, all on one design revision (else 400 naming them). */
  async resolveEstimators(request: Pick<StudyRequest, 'estimatorIds' | 'designRevisionId'>): Promise<{ estimators: EstimatorRow[]; revisionId: number }> {
    if (request.estimatorIds?.length) {
      const ids = [...new Set(request.estimatorIds)];
      const estimators = await this.repo.estimatorsByIds(ids);
      const missing = ids.filter((id) => !estimators.some((e) => e.id === id));
      if (missing.length) {
        throw new HttpProblem(400, 'unknown-estimators', 'Unknown estimators', `There is no estimator with id ${missing.join(', ')}.`, { estimatorIds: missing });
      }
      const revisions = [...new Set(estimators.map((e) => e.designRevisionId))];
      if (revisions.length > 1 || (request.designRevisionId !== undefined && revisions[0] !== request.designRevisionId)) {
        const byRevision = new Map<number, EstimatorRow[]>();
        for (const e of estimators) byRevision.set(e.designRevisionId, [...(byRevision.get(e.designRevisionId) ?? []), e]);
        const labels: string[] = [];
        for (const [rev, list] of byRevision) {
          const r = await this.repo.revision(rev);
          labels.push(`${r ? `${r.designKey} revision ${r.revision}` : `design revision ${rev}`}: ${list.map(describe).join(', ')}`);
        }
        const detail =
          revisions.length > 1
            ? `A study needs estimators that all run one design revision; these run ${revisions.length}: ${labels.join('; ')}.`
            : `The estimators do not run design revision ${request.designRevisionId}: ${labels.join('; ')}.`;
        throw new HttpProblem(400, 'mixed-design-revisions', 'Estimators on different design revisions', detail, {
          revisions: [...byRevision].map(([designRevisionId, list]) => ({ designRevisionId, estimatorIds: list.map((e) => e.id) })),
        });
      }
      return { estimators, revisionId: revisions[0] };
    }
    const revisionId = request.designRevisionId!;
    if (!(await this.repo.revision(revisionId))) {
      throw new HttpProblem(400, 'unknown-design-revision', 'Unknown design revision', `There is no design revision with id ${revisionId}.`);
    }
    const estimators = await this.repo.estimatorsOnRevision(revisionId);
    if (!estimators.length) {
      throw new HttpProblem(422, 'no-estimators', 'No estimators on this revision', `No estimator runs design revision ${revisionId}, so there are no field residuals to study.`);
    }
    return { estimators, revisionId };
  }

  /** The uploads of a request, all on one design revision (else 400). */
  private async resolveUploads(ids: readonly number[]): Promise<{ uploads: { id: number; name: string; designRevisionId: number }[]; revisionId: number }> {
    const unique = [...new Set(ids)];
    const uploads = await this.repo.uploadsByIds(unique);
    const missing = unique.filter((id) => !uploads.some((u) => u.id === id));
    if (missing.length) throw new HttpProblem(400, 'unknown-uploads', 'Unknown uploads', `There is no residual upload with id ${missing.join(', ')}.`, { uploadIds: missing });
    const revisions = [...new Set(uploads.map((u) => u.designRevisionId))];
    if (revisions.length > 1) {
      throw new HttpProblem(400, 'mixed-design-revisions', 'Uploads on different design revisions', `A study needs uploads that all belong to one design revision; these belong to revisions with ids ${revisions.join(', ')}.`);
    }
    return { uploads, revisionId: revisions[0] };
  }

  async create(user: User, request: StudyRequest): Promise<RetuneStudy> {
    const from = new Date(request.from);
    const to = new Date(request.to);
    let estimators: EstimatorRow[] = [];
    let revisionId: number;
    let uploads: { id: number; name: string; designRevisionId: number }[] = [];
    if (request.uploadIds?.length) {
      ({ uploads, revisionId } = await this.resolveUploads(request.uploadIds));
      if (request.designRevisionId !== undefined && request.designRevisionId !== revisionId) {
        throw new HttpProblem(400, 'mixed-design-revisions', 'Uploads on another design revision', `The uploads belong to design revision ${revisionId}, not ${request.designRevisionId}.`);
      }
      if (request.estimatorIds?.length) {
        estimators = (await this.resolveEstimators({ estimatorIds: request.estimatorIds, designRevisionId: revisionId })).estimators;
      } else if (request.designRevisionId !== undefined) {
        estimators = await this.repo.estimatorsOnRevision(revisionId);
      }
    } else {
      ({ estimators, revisionId } = await this.resolveEstimators(request));
    }
    const revision = (await this.repo.revision(revisionId))!;
    const m = revision.measurementDim;
    const model = revision.model as unknown as DesignModel;
    // A design no study can use is refused before any sample is read.
    refusedAsProblem(() => checkModel(model, m));

    const { samples: perEstimator, capped, total: fieldTotal } = estimators.length
      ? await this.readSamples(estimators, from, to, m)
      : { samples: new Map<number, EstimatorSamples & { nisSum: number }>(), capped: false, total: 0 };
    const segments: Float64Array[][] = [];
    let nisSum = 0;
    for (const s of perEstimator.values()) {
      for (const segment of runs(s)) segments.push(segment);
      nisSum += s.nisSum;
    }
    // Uploads: each one is cut into unbroken runs of consecutive seq; they carry no NIS.
    const uploadSegments: Float64Array[][] = [];
    const uploadCounts: { id: number; name: string; samples: number }[] = [];
    for (const u of uploads) {
      const rows = await this.repo.uploadSamples(u.id);
      for (const seg of runs({ seq: rows.map((r) => r.seq), t: [], nu: rows.map((r) => Float64Array.from(r.nu)) })) uploadSegments.push(seg);
      uploadCounts.push({ id: u.id, name: u.name, samples: rows.length });
    }
    const uploadTotal = uploadCounts.reduce((a, u) => a + u.samples, 0);
    segments.push(...uploadSegments);
    const total = fieldTotal + uploadTotal;
    if (total === 0) {
      throw new HttpProblem(
        422,
        'no-samples',
        'No samples in the window',
        uploads.length
          ? 'Neither the uploads nor the estimators gave any innovation samples.'
          : `None of the ${estimators.length} estimator${estimators.length === 1 ? '' : 's'} stored innovation samples between ${from.toISOString()} and ${to.toISOString()}.`,
      );
    }

    const numbers = refusedAsProblem(() =>
      retuneNumbers(model, m, segments, nisSum, {
        lags: request.lags ?? 15,
        estimateQ: request.estimateQ ?? 'diagonal',
        estimateR: request.estimateR ?? 'diagonal',
        regulatorK: request.regulatorK,
        marginFloor: request.marginFloor,
      }),
    );

    const notes = [...numbers.notes];
    if (uploadSegments.length) {
      // Uploaded samples have no stored NIS: νᵀ S⁻¹ ν with S the filter in use's predicted innovation covariance.
      const Sinv = inverse(new Matrix(numbers.current.S));
      let uploadNis = 0;
      for (const seg of uploadSegments) for (const nu of seg) uploadNis += quadratic(Sinv, nu);
      const observed = (nisSum + uploadNis) / total / m;
      numbers.nis = { ...numbers.nis, observed };
      const at = notes.findIndex((n) => n.startsWith('The observed NIS'));
      if (at >= 0) notes.splice(at, 1);
      const gap = observed / numbers.nis.predictedCurrent - 1;
      if (Number.isFinite(gap) && Math.abs(gap) > 0.25) {
        notes.push(
          `The observed NIS (${observed.toPrecision(3)} per component) differs by ${Math.round(Math.abs(gap) * 100)} % from what the estimated noise predicts for the filter in use ` +
            `(${numbers.nis.predictedCurrent.toPrecision(3)}): the innovations carry something the model does not, and the estimate deserves suspicion.`,
        );
      }
      notes.push(
        `${uploadTotal} samples come from ${uploads.length} upload${uploads.length === 1 ? '' : 's'} (${uploads.map((u) => `#${u.id} ${u.name}`).join(', ')}), ` +
          `in ${uploadSegments.length} unbroken run${uploadSegments.length === 1 ? '' : 's'}; the window does not apply to them, and their NIS is computed from ν and the S of the filter in use (uploads store none).`,
      );
    }
    if (capped) {
      notes.push(
        `The window held more than ${this.settings.sampleCap.toLocaleString('en')} samples: the newest ${this.settings.sampleCap.toLocaleString('en')} were used ` +
          `(from ${new Date(Math.min(...[...perEstimator.values()].filter((s) => s.t.length).map((s) => s.t[0]))).toISOString()}).`,
      );
    }
    const silent = estimators.filter((e) => !(perEstimator.get(e.id)?.t.length ?? 0));
    if (silent.length) notes.push(`No samples in the window from ${silent.map(describe).join(', ')}.`);
    if (segments.length - uploadSegments.length > estimators.length - silent.length) {
      notes.push(`The samples form ${segments.length} unbroken runs (split where sequence numbers jump); lagged products never cross a break.`);
    }

    const sources = [
      ...(estimators.length || !uploads.length ? [`${estimators.length} estimator${estimators.length === 1 ? '' : 's'}`] : []),
      ...(uploads.length ? [`${uploads.length} upload${uploads.length === 1 ? '' : 's'}`] : []),
    ].join(' + ');
    const title =
      request.title?.trim() ||
      `${revision.designKey} r${revision.revision}: ${sources}, ${from.toISOString().slice(0, 16)}Z to ${to
        .toISOString()
        .slice(0, 16)}Z`;
    const result = {
      design: {
        designId: revision.designId,
        designKey: revision.designKey,
        revisionId: revision.id,
        revision: revision.revision,
        stateDim: revision.stateDim,
        measurementDim: m,
      },
      estimators: estimators.map((e) => ({ id: e.id, unitKey: e.unitKey, key: e.key, samples: perEstimator.get(e.id)?.t.length ?? 0 })),
      ...(uploads.length ? { uploads: uploadCounts } : {}),
      samples: total,
      assumed: numbers.assumed,
      estimated: numbers.estimated,
      nis: numbers.nis,
      current: numbers.current,
      proposed: numbers.proposed,
      loop: numbers.loop,
      autocovariance: numbers.autocovariance,
      notes,
      caution: STUDY_CAUTION,
    };
    const id = await this.repo.insertStudy({ title, createdBy: user.id, request, result, designRevisionId: revision.id });
    return this.get(id);
  }

  async get(id: number): Promise<RetuneStudy> {
    const row = await this.repo.study(id);
    if (!row) throw new HttpProblem(404, 'not-found', 'No such study', `There is no retune study ${id}.`);
    return toStudy(row);
  }

  /** A new design revision in draft from a study's estimates; one per study (409 for a second). */
  async createDraft(user: User, id: number): Promise<DraftRevisionCreated> {
    return this.knex.transaction(async (trx) => {
      const row = await this.repo.study(id, trx, true);
      if (!row) throw new HttpProblem(404, 'not-found', 'No such study', `There is no retune study ${id}.`);
      if (row.draft_revision_id !== null) {
        throw new HttpProblem(409, 'draft-exists', 'This study has a draft already', `Retune study #${id} already made draft design revision ${row.draft_revision_id}.`, {
          draftRevisionId: row.draft_revision_id,
        });
      }
      const source = await this.repo.revision(row.design_revision_id, trx);
      if (!source) throw new HttpProblem(409, 'revision-gone', 'The study\'s design revision is gone', `Design revision ${row.design_revision_id} no longer exists.`);
      const study = toStudy(row);
      const revision = await this.repo.nextRevisionNumber(trx, source.designId);
      const model = { ...source.model, Q: study.estimated.Q, R: study.estimated.R, L: study.proposed.L };
      const estimatorList = study.estimators.filter((e) => e.samples > 0).map((e) => `${e.unitKey}/${e.key}`);
      const notes =
        `Draft from retune study #${id}: ${study.title}. Q and R estimated by autocovariance least squares from ${study.samples} field samples of ` +
        `${estimatorList.length} estimator${estimatorList.length === 1 ? '' : 's'} on revision ${source.revision} (${study.request.from} to ${study.request.to}); ` +
        `L is the steady-state predictor gain for them. Made by ${user.displayName}. ${STUDY_CAUTION}`;
      const draftId = await this.repo.insertDraftRevision(trx, {
        designId: source.designId,
        revision,
        stateDim: source.stateDim,
        measurementDim: source.measurementDim,
        model,
        notes,
      });
      await this.repo.setDraftRevision(trx, id, draftId);
      return { revisionId: draftId, revision, designKey: source.designKey, status: 'draft' as const, studyId: id };
    });
  }

  /** The newest `cap` samples in the window, per estimator in time order; nu decoded from float32. */
  private async readSamples(
    estimators: EstimatorRow[],
    from: Date,
    to: Date,
    m: number,
  ): Promise<{ samples: Map<number, EstimatorSamples & { nisSum: number }>; capped: boolean; total: number }> {
    const cap = this.settings.sampleCap;
    const byId = new Map<number, EstimatorSamples & { nisSum: number }>(estimators.map((e) => [e.id, { seq: [], t: [], nu: [], nisSum: 0 }]));
    const cursor = await this.repo.studyCursor(
      estimators.map((e) => e.id),
      from,
      to,
      cap + 1,
    );
    let rows = 0;
    let capped = false;
    try {
      for await (const row of cursor.rows as AsyncIterable<[number, number, number, number, Buffer]>) {
        if (rows === cap) {
          capped = true;
          break;
        }
        const [id, seq, tMs, nis, buf] = row;
        const s = byId.get(Number(id));
        if (!s || buf.length !== 4 * m) continue;
        const nu = new Float64Array(m);
        for (let j = 0; j < m; j++) nu[j] = buf.readFloatLE(4 * j);
        s.seq.push(Number(seq));
        s.t.push(Number(tMs));
        s.nu.push(nu);
        s.nisSum += Number(nis);
        rows += 1;
      }
    } finally {
      await cursor.release();
    }
    // newest first from the cursor → time order
    for (const s of byId.values()) {
      s.seq.reverse();
      s.t.reverse();
      s.nu.reverse();
    }
    return { samples: byId, capped, total: rows };
  }
}

/** Runs a computation, turning a refusal of the design or the data into a 422 problem. */
function refusedAsProblem<T>(compute: () => T): T {
  try {
    return compute();
  } catch (err) {
    if (err instanceof StudyRefused) throw new HttpProblem(422, err.kind, err.title, err.message);
    throw err;
  }
}

/** Splits one estimator's samples (time order) into unbroken runs of consecutive sequence numbers. */
export function runs(s: EstimatorSamples): Float64Array[][] {
  const out: Float64Array[][] = [];
  let current: Float64Array[] = [];
  for (let i = 0; i < s.seq.length; i++) {
    if (i > 0 && s.seq[i] !== (s.seq[i - 1] + 1) % SEQ_MODULUS) {
      if (current.length) out.push(current);
      current = [];
    }
    current.push(s.nu[i]);
  }
  if (current.length) out.push(current);
  return out;
}

export function toStudy(row: StudyRow): RetuneStudy {
  const r = row.result as Omit<RetuneStudy, 'id' | 'title' | 'createdAt' | 'createdBy' | 'request' | 'draftRevisionId'>;
  return {
    id: row.id,
    title: row.title,
    createdAt: new Date(row.created_at).toISOString(),
    createdBy: row.created_by_name ?? '(removed user)',
    request: row.request as StudyRequest,
    design: r.design,
    estimators: r.estimators,
    ...(r.uploads ? { uploads: r.uploads } : {}),
    samples: r.samples,
    assumed: r.assumed,
    estimated: r.estimated,
    nis: r.nis,
    current: r.current,
    proposed: r.proposed,
    loop: r.loop,
    autocovariance: r.autocovariance,
    notes: r.notes,
    caution: STUDY_CAUTION,
    draftRevisionId: row.draft_revision_id,
  };
}

/** νᵀ M ν */
function quadratic(M: Matrix, nu: ArrayLike<number>): number {
  let sum = 0;
  for (let i = 0; i < M.rows; i++) for (let j = 0; j < M.columns; j++) sum += nu[i] * M.get(i, j) * nu[j];
  return sum;
}

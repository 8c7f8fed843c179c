// Residual upload: reads a text/csv body as it arrives (a line splitter over the request
// stream, never the whole file in memory), validates it row by row, and stores the good
// rows in batches inside one transaction: a refused upload (bad header, too large, a
// broken connection) leaves nothing behind.
import type { Readable } from 'node:stream';
import type { Knex } from 'knex';
import type { UploadReport, User } from '../../../shared/src/api/api-types';
import { HttpProblem } from '../http/problem';
import { LineSplitter, REPORT_ROWS, UPLOAD_LIMIT_BYTES, UploadHeaderError, UploadValidator, type AcceptedRow } from './residual-upload';
import type { ResidualUploadRepository } from './residual-upload-repository';
import type { WorkbenchRepository } from './workbench-repository';

/** Rows per insert. */
export const UPLOAD_BATCH = 5000;

export const tooLarge = (limit: number) =>
  new HttpProblem(
    413,
    'upload-too-large',
    'The file is too large',
    `A residual upload may be at most ${Math.round(limit / 1024 / 1024)} MB; split the log into several files (each its own upload) and study them together.`,
    { limitBytes: limit },
  );

export class ResidualUploadService {
  constructor(
    private readonly knex: Knex,
    private readonly uploads: ResidualUploadRepository,
    private readonly workbench: WorkbenchRepository,
    private readonly limit = UPLOAD_LIMIT_BYTES,
  ) {}

  async upload(user: User, q: { designRevisionId: number; name: string }, body: Readable, declaredLength?: number): Promise<UploadReport> {
    if (declaredLength !== undefined && declaredLength > this.limit) throw tooLarge(this.limit);
    const revision = await this.workbench.revision(q.designRevisionId);
    if (!revision) throw new HttpProblem(400, 'unknown-design-revision', 'Unknown design revision', `There is no design revision with id ${q.designRevisionId}.`);
    const m = revision.measurementDim;
    return this.knex.transaction(async (trx) => {
      const id = await this.uploads.insertUpload(trx, { name: q.name, designRevisionId: revision.id, createdBy: user.id });
      const splitter = new LineSplitter();
      let validator: UploadValidator | null = null;
      let line = 0;
      let bytes = 0;
      let accepted = 0;
      let rejectedCount = 0;
      const rejected: { line: number; reason: string }[] = [];
      let batch: AcceptedRow[] = [];
      const take = async (text: string) => {
        line += 1;
        if (!validator) {
          if (text.trim() === '') throw new HttpProblem(400, 'upload-header', 'No header', 'The first line of the file is empty; it must be the header seq,t,nu_1..nu_m.');
          try {
            validator = new UploadValidator(text, m);
          } catch (err) {
            if (err instanceof UploadHeaderError) throw new HttpProblem(400, 'upload-header', 'The header cannot be read', err.message);
            throw err;
          }
          return;
        }
        const v = validator.check(text);
        if (v.ok === 'skip') return;
        if (v.ok) {
          batch.push(v.row);
          accepted += 1;
          if (batch.length >= UPLOAD_BATCH) {
            const full = batch;
            batch = [];
            await this.uploads.insertSamples(trx, id, full);
          }
        } else {
          rejectedCount += 1;
          if (rejected.length < REPORT_ROWS) rejected.push({ line, reason: v.reason });
        }
      };
      // destroyOnReturn: false — on a refusal the request stays open so the answer can still be sent
      for await (const chunk of body.iterator({ destroyOnReturn: false }) as AsyncIterable<Buffer>) {
        bytes += chunk.length;
        if (bytes > this.limit) throw tooLarge(this.limit);
        for (const text of splitter.push(chunk)) await take(text);
      }
      for (const text of splitter.end()) await take(text);
      if (!validator) throw new HttpProblem(400, 'upload-empty', 'The file is empty', 'The upload has no header and no rows.');
      await this.uploads.insertSamples(trx, id, batch);
      if (accepted === 0) {
        throw new HttpProblem(422, 'upload-no-rows', 'No row could be used', `None of the ${rejectedCount} rows passed the checks; nothing was stored.`, { rejected });
      }
      await this.uploads.finish(trx, id, { accepted, rejected: rejectedCount, report: rejected });
      return { id, rowsAccepted: accepted, rowsRejected: rejectedCount, rejected };
    });
  }
}

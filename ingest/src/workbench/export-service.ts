// Residual export: checks the estimators, opens a database cursor over their samples in
// the window and hands back the rows and the formatter for the router to pipe into the
// response (the router owns the response; this knows nothing of HTTP but its errors).
import type { Readable } from 'node:stream';
import { HttpProblem } from '../http/problem';
import { ResidualFormatter, type ExportEstimator, type ExportFormat } from './residual-export';
import type { WorkbenchRepository } from './workbench-repository';

export interface ExportRequest {
  estimatorIds: number[];
  from: Date;
  to: Date;
  format: ExportFormat;
  limit?: number;
}

export interface OpenExport {
  filename: string;
  contentType: string;
  /** Rows expected, from the minute rollups (whole minutes, so approximate), capped by the limit. */
  estimatedRows: number;
  /** Widest measurement among the estimators: the CSV has nu_1..nu_m. */
  m: number;
  rows: Readable;
  formatter: ResidualFormatter;
  /** Closes the cursor if it is still open and returns the connection to the pool. */
  release: () => Promise<void>;
}

const safe = (s: string) => s.replace(/[^A-Za-z0-9._-]+/g, '_');
const stamp = (d: Date) => d.toISOString().replace(/[-:]/g, '').replace(/\.\d{3}/, '');

/** Exports running at once: each holds a database connection for as long as its client reads. */
export const MAX_CONCURRENT_EXPORTS = 3;

export class ExportService {
  private running = 0;

  constructor(
    private readonly repo: WorkbenchRepository,
    private readonly maxConcurrent = MAX_CONCURRENT_EXPORTS,
  ) {}

  async open(request: ExportRequest): Promise<OpenExport> {
    const ids = [...new Set(request.estimatorIds)];
    const found = await this.repo.estimatorsByIds(ids);
    const missing = ids.filter((id) => !found.some((e) => e.id === id));
    if (missing.length) {
      throw new HttpProblem(400, 'unknown-estimators', 'Unknown estimators', `There is no estimator with id ${missing.join(', ')}.`, { estimatorIds: missing });
    }
    const m = Math.max(...found.map((e) => e.measurementDim));
    const estimators = new Map<number, ExportEstimator>(found.map((e) => [e.id, { unitKey: e.unitKey, key: e.key }]));
    const estimate = await this.repo.estimatedSamples(ids, request.from, request.to);
    const which = found.length === 1 ? `${safe(found[0].unitKey)}-${safe(found[0].key)}` : `${found.length}-estimators`;
    if (this.running >= this.maxConcurrent) {
      throw new HttpProblem(
        429,
        'too-many-exports',
        'Too many exports at once',
        `${this.running} residual exports are running, the most this service streams at once; try again when one has finished.`,
      );
    }
    this.running += 1;
    let cursor;
    try {
      cursor = await this.repo.exportCursor(ids, request.from, request.to, request.limit);
    } catch (err) {
      this.running -= 1;
      throw err;
    }
    let released = false;
    const release = async () => {
      if (released) return;
      released = true;
      try {
        await cursor.release();
      } finally {
        this.running -= 1;
      }
    };
    return {
      filename: `residuals-${which}-${stamp(request.from)}-${stamp(request.to)}.${request.format}`,
      contentType: request.format === 'csv' ? 'text/csv; charset=utf-8' : 'application/json; charset=utf-8',
      estimatedRows: request.limit === undefined ? estimate : Math.min(estimate, request.limit),
      m,
      rows: cursor.rows,
      formatter: new ResidualFormatter(request.format, estimators, m),
      release,
    };
  }
}

// Residual upload, the pure part: a line splitter over a byte stream and a row-by-row
// validator of the CSV (docs/residual-upload.md). Accepts the residual export's own
// columns (estimator_id,unit,estimator,seq,t,nis,nu_1..nu_m) or a minimal seq,t,nu_1..nu_m.
import { StringDecoder } from 'node:string_decoder';

/** Largest upload body, bytes. */
export const UPLOAD_LIMIT_BYTES = 50 * 1024 * 1024;
/** The report keeps this many rejected rows. */
export const REPORT_ROWS = 100;
const SEQ_MAX = 2 ** 31 - 1;
const OPTIONAL = new Set(['estimator_id', 'unit', 'estimator', 'nis']);
const ISO = /^\d{4}-\d{2}-\d{2}[T ]\d{2}:\d{2}(?::\d{2}(?:\.\d+)?)?(?:Z|[+-]\d{2}:?\d{2})$/i;
const NUMBER = /^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$/;

/** A header the upload cannot be read with: the whole upload is refused (400). */
export class UploadHeaderError extends Error {
  override readonly name = 'UploadHeaderError';
}

/** Splits decoded text into lines (LF or CRLF); holds back only the unfinished last line. */
export class LineSplitter {
  private readonly decoder = new StringDecoder('utf8');
  private rest = '';

  push(chunk: Buffer): string[] {
    const text = this.rest + this.decoder.write(chunk);
    const lines = text.split('\n');
    this.rest = lines.pop() ?? '';
    return lines.map(stripCr);
  }

  end(): string[] {
    const last = this.rest + this.decoder.end();
    this.rest = '';
    return last ? [stripCr(last)] : [];
  }
}

const stripCr = (s: string) => (s.endsWith('\r') ? s.slice(0, -1) : s);

/** The fields of one CSV line (RFC 4180 quoting, no line breaks inside a field); null when a quote is unbalanced. */
export function splitCsv(line: string): string[] | null {
  if (!line.includes('"')) return line.split(',');
  const out: string[] = [];
  let field = '';
  let quoted = false;
  for (let i = 0; i < line.length; i++) {
    const c = line[i];
    if (quoted) {
      if (c === '"' && line[i + 1] === '"') {
        field += '"';
        i++;
      } else if (c === '"') quoted = false;
      else field += c;
    } else if (c === '"') quoted = true;
    else if (c === ',') {
      out.push(field);
      field = '';
    } else field += c;
  }
  if (quoted) return null;
  out.push(field);
  return out;
}

export interface AcceptedRow {
  seq: number;
  /** ISO 8601 as given, or null. */
  t: string | null;
  nu: number[];
}

export type RowVerdict = { ok: true; row: AcceptedRow } | { ok: false; reason: string } | { ok: 'skip' };

/** Reads the header, then validates each row against it and against the rows before. */
export class UploadValidator {
  private readonly columns: number;
  private readonly seqAt: number;
  private readonly tAt: number;
  private readonly nuAt: number[];
  private lastSeq = 0;

  constructor(header: string, readonly m: number) {
    const names = (splitCsv(header.replace(/^\uFEFF/, '')) ?? []).map((s) => s.trim().toLowerCase());
    const at = (name: string) => names.indexOf(name);
    this.seqAt = at('seq');
    this.tAt = at('t');
    if (this.seqAt < 0 || this.tAt < 0) {
      throw new UploadHeaderError(`The first line must be a header with the columns seq, t and nu_1..nu_${m}; it reads "${header.slice(0, 200)}".`);
    }
    const nu = names.filter((n) => /^nu_\d+$/.test(n));
    const unknown = names.filter((n) => n !== 'seq' && n !== 't' && !OPTIONAL.has(n) && !/^nu_\d+$/.test(n));
    if (unknown.length) {
      throw new UploadHeaderError(`Unknown column${unknown.length === 1 ? '' : 's'} ${unknown.map((u) => `"${u}"`).join(', ')}: expected seq, t, nu_1..nu_${m} and optionally estimator_id, unit, estimator, nis.`);
    }
    if (new Set(names).size !== names.length) throw new UploadHeaderError('The header names a column twice.');
    this.nuAt = Array.from({ length: nu.length }, (_, j) => at(`nu_${j + 1}`));
    if (this.nuAt.some((i) => i < 0) || nu.length !== m) {
      throw new UploadHeaderError(
        `The design revision measures ${m} component${m === 1 ? '' : 's'}, so the header needs nu_1..nu_${m}; it has ${nu.length ? nu.join(', ') : 'no nu_ columns'}.`,
      );
    }
    this.columns = names.length;
  }

  check(line: string): RowVerdict {
    if (line.trim() === '') return { ok: 'skip' };
    const f = splitCsv(line);
    if (!f) return { ok: false, reason: 'unbalanced quote' };
    if (f.length !== this.columns) return { ok: false, reason: `${f.length} columns, the header has ${this.columns}` };
    const seqText = f[this.seqAt].trim();
    if (!/^\d+$/.test(seqText) || Number(seqText) < 1 || Number(seqText) > SEQ_MAX) {
      return { ok: false, reason: `seq "${seqText.slice(0, 40)}" is not a positive integer (at most ${SEQ_MAX})` };
    }
    const seq = Number(seqText);
    if (seq <= this.lastSeq) return { ok: false, reason: `seq ${seq} does not increase (the previous accepted row has ${this.lastSeq})` };
    const tText = f[this.tAt].trim();
    if (tText !== '' && (!ISO.test(tText) || Number.isNaN(Date.parse(tText)))) {
      return { ok: false, reason: `t "${tText.slice(0, 40)}" is not an ISO 8601 date-time with a time zone (or empty)` };
    }
    const nu: number[] = [];
    for (let j = 0; j < this.m; j++) {
      const text = f[this.nuAt[j]].trim();
      const x = Number(text);
      // float32 storage: a finite double beyond float32's range would become infinite
      if (!NUMBER.test(text) || !Number.isFinite(Math.fround(x))) return { ok: false, reason: `nu_${j + 1} "${text.slice(0, 40)}" is not a finite number` };
      nu.push(x);
    }
    this.lastSeq = seq;
    return { ok: true, row: { seq, t: tText === '' ? null : tText, nu } };
  }
}

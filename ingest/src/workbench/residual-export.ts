// Residual export: rows from the database cursor turned into CSV or a JSON array, a
// chunk of about 64 KB at a time. The transform holds back nothing but the chunk it is
// filling, so memory stays flat however many rows pass (docs/residual-export.md).
import { Transform, type TransformCallback } from 'node:stream';

export type ExportFormat = 'csv' | 'json';

/** What each estimator id writes into its rows. */
export interface ExportEstimator {
  unitKey: string;
  key: string;
}

/** A cursor row: [estimator_id, seq, t (RFC 3339), nis (text), nu (little-endian float32 × m)]. */
export type ExportRow = [number, number, string, string, Buffer];

const CHUNK = 64 * 1024;
const NUMBER = /^-?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$/;

/**
 * A decimal that reads back as the same float32: nine significant digits always do
 * (IEEE 754-2008, 5.12.2: 9 digits for binary32). One toPrecision per value; searching
 * for the shortest form took a third of a 1,000,000-row export's time (profiled).
 */
export function float32Text(x: number): string {
  if (!Number.isFinite(x)) return '';
  if (x === 0) return '0';
  // Trailing zeros of the mantissa go: 0.500000000 → 0.5, 1.50000000e-7 → 1.5e-7.
  const text = x.toPrecision(9);
  const e = text.indexOf('e');
  const mantissa = e < 0 ? text : text.slice(0, e);
  if (mantissa.indexOf('.') < 0) return text;
  let end = mantissa.length;
  while (mantissa.charCodeAt(end - 1) === 48) end--; // '0'
  if (mantissa.charCodeAt(end - 1) === 46) end--; // '.'
  return e < 0 ? mantissa.slice(0, end) : mantissa.slice(0, end) + text.slice(e);
}

/** A CSV field (RFC 4180): quoted when it holds a comma, a quote or a line break. */
export function csvField(s: string): string {
  return /[",\r\n]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s;
}

/** estimator_id,unit,estimator,seq,t,nis,nu_1..nu_m */
export function csvHeader(m: number): string {
  return ['estimator_id', 'unit', 'estimator', 'seq', 't', 'nis', ...Array.from({ length: m }, (_, i) => `nu_${i + 1}`)].join(',') + '\r\n';
}

function nuValues(nu: Buffer): string[] {
  const out: string[] = [];
  for (let j = 0; 4 * j + 3 < nu.length; j++) out.push(float32Text(nu.readFloatLE(4 * j)));
  return out;
}

/**
 * Cursor rows → text. CSV: the header, then one line per sample, nu_j columns left
 * empty past an estimator's own m. JSON: `[` row objects separated by `,\n` `]`.
 */
export class ResidualFormatter extends Transform {
  private buffer = '';
  private first = true;
  private readonly prefix: Map<number, string>;

  constructor(
    private readonly format: ExportFormat,
    estimators: ReadonlyMap<number, ExportEstimator>,
    private readonly m: number,
  ) {
    super({ writableObjectMode: true, readableObjectMode: false, writableHighWaterMark: 1000 });
    // The fixed leading fields of each estimator, formatted once.
    this.prefix = new Map(
      [...estimators].map(([id, e]) => [
        id,
        format === 'csv'
          ? `${id},${csvField(e.unitKey)},${csvField(e.key)},`
          : `{"estimatorId":${id},"unit":${JSON.stringify(e.unitKey)},"estimator":${JSON.stringify(e.key)},`,
      ]),
    );
    // The header (or the opening bracket) goes out at once, so the response starts before the first row.
    this.push(format === 'csv' ? csvHeader(m) : '[');
  }

  override _transform(row: ExportRow, _enc: BufferEncoding, done: TransformCallback): void {
    const [id, seq, t, nis, nu] = row;
    const prefix = this.prefix.get(Number(id)) ?? '';
    const values = nuValues(nu);
    if (this.format === 'csv') {
      while (values.length < this.m) values.push('');
      this.buffer += `${prefix}${seq},${t},${nis},${values.join(',')}\r\n`;
    } else {
      const nisJson = NUMBER.test(nis) ? nis : 'null';
      this.buffer += `${this.first ? '\n' : ',\n'}${prefix}"seq":${seq},"t":"${t}","nis":${nisJson},"nu":[${values.map((v) => v || 'null').join(',')}]}`;
      this.first = false;
    }
    if (this.buffer.length >= CHUNK) {
      this.push(this.buffer);
      this.buffer = '';
    }
    done();
  }

  override _flush(done: TransformCallback): void {
    if (this.format === 'json') this.buffer += this.first ? ']\n' : '\n]\n';
    if (this.buffer) this.push(this.buffer);
    this.buffer = '';
    done();
  }
}

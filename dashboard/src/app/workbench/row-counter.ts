// Counting the rows of a residual export while it streams in, chunk by chunk, without
// holding the text: CSV counts data lines; JSON counts records (the objects of the
// longest array of objects), or top-level objects when the file is one JSON object per
// line.

export type ExportFormat = 'csv' | 'json';

export interface RowCounter {
  /** Feeds the next piece of decoded text. */
  push(text: string): void;
  /** Data rows seen so far. */
  readonly rows: number;
}

/** Data lines of a CSV file: non-empty lines after the header, lines starting with '#' left out. */
export class CsvRowCounter implements RowCounter {
  private lines = 0;
  private lineHasText = false;
  private lineIsComment = false;
  private atLineStart = true;

  push(text: string): void {
    for (let i = 0; i < text.length; i++) {
      const c = text.charCodeAt(i);
      if (c === 10 /* \n */) {
        this.endLine();
        continue;
      }
      if (c === 13 /* \r */) continue;
      if (this.atLineStart) {
        this.atLineStart = false;
        this.lineIsComment = c === 35; /* # */
      }
      this.lineHasText = true;
    }
  }

  get rows(): number {
    // The line still coming in counts once it has text (the file need not end with a newline).
    const lines = this.lines + (this.lineHasText && !this.lineIsComment ? 1 : 0);
    return Math.max(0, lines - 1);
  }

  private endLine(): void {
    if (this.lineHasText && !this.lineIsComment) this.lines++;
    this.lineHasText = false;
    this.lineIsComment = false;
    this.atLineStart = true;
  }
}

/** Records of a JSON export: see the top of this file. Strings (and the brackets inside them) are skipped. */
export class JsonRowCounter implements RowCounter {
  /** Open containers, innermost last, with the objects each array holds so far. */
  private readonly stack: { array: boolean; objects: number }[] = [];
  private inString = false;
  private escaped = false;
  private largestArray = 0;
  private topLevelObjects = 0;

  push(text: string): void {
    for (let i = 0; i < text.length; i++) {
      const c = text[i];
      if (this.inString) {
        if (this.escaped) this.escaped = false;
        else if (c === '\\') this.escaped = true;
        else if (c === '"') this.inString = false;
        continue;
      }
      switch (c) {
        case '"':
          this.inString = true;
          break;
        case '{':
          this.openObject();
          break;
        case '[':
          this.stack.push({ array: true, objects: 0 });
          break;
        case '}':
        case ']':
          this.stack.pop();
          break;
      }
    }
  }

  /** The objects of the longest array of objects (the records, not a short list of column descriptions beside them). */
  get rows(): number {
    if (this.largestArray > 0) return this.largestArray;
    return this.topLevelObjects > 1 ? this.topLevelObjects : 0;
  }

  private openObject(): void {
    const parent = this.stack[this.stack.length - 1];
    if (!parent) this.topLevelObjects++;
    else if (parent.array) this.largestArray = Math.max(this.largestArray, ++parent.objects);
    this.stack.push({ array: false, objects: 0 });
  }
}

export function rowCounter(format: ExportFormat): RowCounter {
  return format === 'csv' ? new CsvRowCounter() : new JsonRowCounter();
}

/** A byte count for reading: "812 B", "1.4 MB" (decimal units). */
export function formatBytes(n: number): string {
  if (!Number.isFinite(n) || n < 0) return '—';
  if (n < 1000) return `${n} B`;
  const units = ['kB', 'MB', 'GB', 'TB'];
  let v = n / 1000;
  let u = 0;
  while (v >= 1000 && u < units.length - 1) {
    v /= 1000;
    u++;
  }
  return `${v >= 100 ? Math.round(v) : v.toFixed(1)} ${units[u]}`;
}

/** The file name a Content-Disposition header gives (filename*= preferred), or null. */
export function dispositionFileName(header: string | null): string | null {
  if (!header) return null;
  const star = /filename\*\s*=\s*(?:UTF-8|utf-8)''([^;]+)/.exec(header);
  if (star) {
    try {
      return safeFileName(decodeURIComponent(star[1].trim()));
    } catch {
      /* fall through to the plain form */
    }
  }
  const plain = /filename\s*=\s*("([^"]*)"|[^;]+)/.exec(header);
  const name = plain ? (plain[2] ?? plain[1]).trim() : '';
  return name ? safeFileName(name) : null;
}

/** A file name without path separators or control characters. */
function safeFileName(name: string): string | null {
  // eslint-disable-next-line no-control-regex
  const clean = name.replace(/[\\/\u0000-\u001f]/g, '_').trim();
  return clean && clean !== '.' && clean !== '..' ? clean : null;
}

/** The name to save an export under when the service names none. */
export function defaultExportName(from: Date, to: Date, format: ExportFormat): string {
  const stamp = (d: Date) => d.toISOString().slice(0, 16).replace(/[-:]/g, '').replace('T', '-');
  return `whitecap-residuals-${stamp(from)}_${stamp(to)}.${format}`;
}

import { formatP, formatStat } from '../fleet/nis-gauge';

/** One line of an alert's evidence: a readable name and its value in words or numbers. */
export interface EvidenceLine {
  key: string;
  label: string;
  value: string;
}

const LABELS: Record<string, string> = {
  pValue: 'p-value',
  nisAverage: 'NIS window mean',
  average: 'mean',
  expected: 'expected',
  lower: 'lower bound',
  upper: 'upper bound',
  windowLength: 'window length',
  samples: 'samples',
  atSeq: 'at sample number',
  threshold: 'threshold',
  q: 'Q statistic',
  m: 'measured components (m)',
  lost: 'lost samples',
  silentForMs: 'silent for',
  lastSampleAt: 'last sample at',
};

/** "nisAverage" → "nis average", "window.lower" → "window › lower bound". */
function labelOf(path: string[]): string {
  return path
    .map(
      (part) =>
        LABELS[part] ??
        part
          .replace(/Ms$/, '')
          .replace(/([a-z0-9])([A-Z])/g, '$1 $2')
          .replace(/[-_]/g, ' ')
          .toLowerCase(),
    )
    .join(' › ');
}

function valueOf(key: string, v: unknown): string {
  if (v === null || v === undefined) return '—';
  if (typeof v === 'number') {
    if (/Ms$/.test(key) && Number.isFinite(v)) return `${formatStat(v / 1000)} s`;
    // Epoch milliseconds under a name like lastReceivedAt.
    if (/At$/.test(key) && v > 1e11 && v < 1e14) return new Date(v).toLocaleString();
    return /^p(Value)?$/i.test(key) ? formatP(v) : formatStat(v);
  }
  if (typeof v === 'boolean') return v ? 'yes' : 'no';
  if (typeof v === 'string') {
    if (/^\d{4}-\d\d-\d\dT/.test(v) && Number.isFinite(Date.parse(v))) return new Date(v).toLocaleString();
    return v;
  }
  if (Array.isArray(v)) return v.map((x) => valueOf('', x)).join(', ');
  return JSON.stringify(v);
}

/** Flattens an alert's evidence object into readable lines (nested objects become "a › b"). */
export function evidenceLines(evidence: Record<string, unknown> | null | undefined, path: string[] = []): EvidenceLine[] {
  if (!evidence) return [];
  const out: EvidenceLine[] = [];
  for (const [k, v] of Object.entries(evidence)) {
    const here = [...path, k];
    if (v && typeof v === 'object' && !Array.isArray(v) && path.length < 3) {
      out.push(...evidenceLines(v as Record<string, unknown>, here));
    } else if (Array.isArray(v) && v.some((x) => x && typeof x === 'object') && path.length < 3) {
      // A list of records (one per component, say): numbered from 1.
      v.forEach((x, i) => {
        const at = [...here, String(i + 1)];
        if (x && typeof x === 'object' && !Array.isArray(x)) out.push(...evidenceLines(x as Record<string, unknown>, at));
        else out.push({ key: at.join('.'), label: labelOf(at), value: valueOf(k, x) });
      });
    } else {
      out.push({ key: here.join('.'), label: labelOf(here), value: valueOf(k, v) });
    }
  }
  return out;
}

// The revision editor's state as plain data and plain functions (checked in
// revision-draft.spec.ts): matrices as the text of their cells, sized by the design's
// dimensions; to and from a model; the problems of the shared validation grouped by
// matrix; reading an uploaded JSON file.
import {
  DESIGN_LIMITS,
  DESIGN_MATRICES,
  type DesignDimension,
  type DesignMatrixKey,
  type DesignMatrixRule,
  type DesignProblem,
} from '../../../../../shared/src/design/design-validation';

export type OptionalMatrix = 'G' | 'B' | 'L' | 'K';
export const OPTIONAL_MATRICES: readonly OptionalMatrix[] = ['G', 'B', 'L', 'K'];

/** What the editor holds: every matrix's cells as typed (kept while a matrix is left out, so it comes back as it was). */
export interface RevisionDraft {
  dims: Record<DesignDimension, number>;
  include: Record<OptionalMatrix, boolean>;
  cells: Record<DesignMatrixKey, string[][]>;
  dt: string;
  notes: string;
}

/** An uploaded file may be at most this large (the service takes 256 KB per request). */
export const UPLOAD_LIMIT_BYTES = 256 * 1024;

export const DIMENSION_WORDS: Record<DesignDimension, string> = {
  n: 'States (n)',
  m: 'Measured components (m)',
  p: 'Noise inputs (p, columns of G)',
  r: 'Control inputs (r, columns of B)',
};

export const DIMENSION_LIMITS: Record<DesignDimension, number> = {
  n: DESIGN_LIMITS.states,
  m: DESIGN_LIMITS.measurements,
  p: DESIGN_LIMITS.noiseInputs,
  r: DESIGN_LIMITS.inputs,
};

const rule = (key: DesignMatrixKey): DesignMatrixRule => DESIGN_MATRICES.find((r) => r.key === key)!;

function isOptional(key: DesignMatrixKey): key is OptionalMatrix {
  return (OPTIONAL_MATRICES as readonly string[]).includes(key);
}

/** Whether a matrix is part of the model being edited. */
export function included(draft: RevisionDraft, key: DesignMatrixKey): boolean {
  if (!isOptional(key)) return true;
  if (key === 'K') return draft.include.K && draft.include.B;
  return draft.include[key];
}

/** The dimension a side of a matrix follows: Q follows p with G, n without. */
function sideDim(draft: Pick<RevisionDraft, 'include'>, key: DesignMatrixKey, side: 'rows' | 'columns'): DesignDimension {
  const d = rule(key)[side];
  return d === 'p' && !draft.include.G ? 'n' : d;
}

/** The shape a matrix must have for the draft's dimensions. */
export function expectedShape(draft: RevisionDraft, key: DesignMatrixKey): { rows: number; columns: number; symbols: string } {
  const r = sideDim(draft, key, 'rows');
  const c = sideDim(draft, key, 'columns');
  return { rows: draft.dims[r], columns: draft.dims[c], symbols: `${r} × ${c}` };
}

/** A grid of `rows` × `columns`, keeping what fits of `cells` and filling the rest with `fill`. */
export function resize(cells: readonly (readonly string[])[], rows: number, columns: number, fill = '0'): string[][] {
  return Array.from({ length: rows }, (_, i) => Array.from({ length: columns }, (_, j) => cells[i]?.[j] ?? fill));
}

function identity(k: number): string[][] {
  return Array.from({ length: k }, (_, i) => Array.from({ length: k }, (_, j) => (i === j ? '1' : '0')));
}

/** Every matrix resized to the draft's dimensions. */
function fitAll(draft: RevisionDraft): RevisionDraft {
  const cells = { ...draft.cells };
  for (const { key } of DESIGN_MATRICES) {
    const { rows, columns } = expectedShape(draft, key);
    cells[key] = resize(draft.cells[key], rows, columns);
  }
  return { ...draft, cells };
}

/** A fresh draft: one state, one measured component, unit matrices to start from. */
export function emptyDraft(): RevisionDraft {
  return fitAll({
    dims: { n: 1, m: 1, p: 1, r: 1 },
    include: { G: false, B: false, L: false, K: false },
    cells: { A: identity(1), C: identity(1), G: identity(1), B: identity(1), Q: identity(1), R: identity(1), L: [], K: [] },
    dt: '',
    notes: '',
  });
}

/** Changes a dimension (1 to its limit) and resizes every matrix that follows it. */
export function setDimension(draft: RevisionDraft, dim: DesignDimension, value: number): RevisionDraft {
  if (!Number.isInteger(value) || value < 1 || value > DIMENSION_LIMITS[dim]) return draft;
  const next = { ...draft, dims: { ...draft.dims, [dim]: value } };
  const cells = { ...draft.cells };
  for (const { key } of DESIGN_MATRICES) {
    if (sideDim(next, key, 'rows') === dim || sideDim(next, key, 'columns') === dim) {
      const { rows, columns } = expectedShape(next, key);
      cells[key] = resize(draft.cells[key], rows, columns);
    }
  }
  return { ...next, cells };
}

/** Puts an optional matrix in or out of the model; one coming in is sized to fit (and Q follows G). */
export function setIncluded(draft: RevisionDraft, key: OptionalMatrix, on: boolean): RevisionDraft {
  const next = { ...draft, include: { ...draft.include, [key]: on } };
  const cells = { ...draft.cells };
  const refit = key === 'G' ? ['G', 'Q'] : key === 'B' ? ['B', 'K'] : [key];
  for (const k of refit as DesignMatrixKey[]) {
    const { rows, columns } = expectedShape(next, k);
    cells[k] = resize(draft.cells[k], rows, columns);
  }
  return { ...next, cells };
}

/** Resizes one matrix to the shape the dimensions want (after an upload of another size). */
export function fitMatrix(draft: RevisionDraft, key: DesignMatrixKey): RevisionDraft {
  const { rows, columns } = expectedShape(draft, key);
  return { ...draft, cells: { ...draft.cells, [key]: resize(draft.cells[key], rows, columns) } };
}

export function setCell(draft: RevisionDraft, key: DesignMatrixKey, i: number, j: number, text: string): RevisionDraft {
  const grid = draft.cells[key].map((row, r) => (r === i ? row.map((v, c) => (c === j ? text : v)) : row));
  return { ...draft, cells: { ...draft.cells, [key]: grid } };
}

const NUMBER = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;

/** A cell's text as the model gets it: a number when it reads as one (a typographic minus too), null when empty, else the text itself. */
export function cellValue(text: string): number | string | null {
  const t = text.trim().replace(/\u2212/g, '-');
  if (t === '') return null;
  return NUMBER.test(t) ? Number(t) : text;
}

/** The model the draft describes, for the shared check and for saving. */
export function modelOf(draft: RevisionDraft): Record<string, unknown> {
  const model: Record<string, unknown> = {};
  for (const { key } of DESIGN_MATRICES) {
    if (included(draft, key)) model[key] = draft.cells[key].map((row) => row.map(cellValue));
  }
  if (draft.dt.trim() !== '') model['dt'] = cellValue(draft.dt);
  return model;
}

function cellText(v: unknown): string {
  if (v === null || v === undefined) return '';
  if (typeof v === 'number') return String(v);
  if (typeof v === 'string') return v;
  return JSON.stringify(v);
}

/** A value's rows as cell texts when it is a list of lists (rows may differ in length), else null. */
function gridOf(value: unknown): string[][] | null {
  if (!Array.isArray(value) || value.length === 0 || !value.every((row) => Array.isArray(row))) return null;
  return (value as unknown[][]).map((row) => row.map(cellText));
}

/**
 * A draft holding a model as it is, sizes and all (a matrix of the wrong size stays so, for
 * the check to point at); the dimensions are read from A, C, G and B.
 */
export function draftFromModel(model: Record<string, unknown>, notes = ''): RevisionDraft {
  const grids = new Map<DesignMatrixKey, string[][]>();
  for (const { key } of DESIGN_MATRICES) {
    const g = gridOf(model[key]);
    if (g) grids.set(key, g);
  }
  const clamp = (v: number | undefined, dim: DesignDimension) => Math.min(Math.max(v ?? 1, 1), DIMENSION_LIMITS[dim]);
  const A = grids.get('A');
  const C = grids.get('C');
  const n = clamp(A?.length ?? C?.[0]?.length, 'n');
  const dims: Record<DesignDimension, number> = {
    n,
    m: clamp(C?.length, 'm'),
    p: clamp(grids.get('G')?.[0]?.length ?? n, 'p'),
    r: clamp(grids.get('B')?.[0]?.length, 'r'),
  };
  const include = { G: grids.has('G'), B: grids.has('B'), L: grids.has('L'), K: grids.has('K') };
  const draft: RevisionDraft = { dims, include, cells: {} as RevisionDraft['cells'], dt: cellText(model['dt']), notes };
  for (const { key } of DESIGN_MATRICES) {
    const { rows, columns } = expectedShape(draft, key);
    draft.cells[key] = grids.get(key) ?? resize([], rows, columns, key === 'A' || key === 'C' || key === 'Q' || key === 'R' ? '' : '0');
  }
  return draft;
}

/** Problems placed where the editor shows them: beside a matrix, beside dt, or over the whole model. */
export interface PlacedProblems {
  byMatrix: Partial<Record<DesignMatrixKey, string[]>>;
  /** Cells at fault per matrix, as "row.column" (zero-based). */
  cells: Partial<Record<DesignMatrixKey, Set<string>>>;
  dt: string[];
  general: string[];
}

const MATRIX_KEYS = new Set<string>(DESIGN_MATRICES.map((r) => r.key));

/** Groups problems by the first part of their path ('model.' from the service is dropped). */
export function placeProblems(problems: readonly DesignProblem[]): PlacedProblems {
  const placed: PlacedProblems = { byMatrix: {}, cells: {}, dt: [], general: [] };
  for (const p of problems) {
    const parts = p.path.replace(/^model\.?/, '').split('.').filter(Boolean);
    const head = parts[0] ?? '';
    if (MATRIX_KEYS.has(head)) {
      const key = head as DesignMatrixKey;
      (placed.byMatrix[key] ??= []).push(p.message);
      if (parts.length === 3) (placed.cells[key] ??= new Set()).add(`${parts[1]}.${parts[2]}`);
    } else if (head === 'dt') {
      placed.dt.push(p.message);
    } else {
      placed.general.push(p.message);
    }
  }
  return placed;
}

export type UploadReading = { ok: true; model: Record<string, unknown>; notes: string | null } | { ok: false; message: string };

function kilobytes(bytes: number): string {
  return `${Math.ceil(bytes / 1024)} KB`;
}

/** Refuses a file over the limit before reading it; null when its size is fine. */
export function uploadSizeProblem(name: string, bytes: number): string | null {
  if (bytes > UPLOAD_LIMIT_BYTES) {
    return `${name} is ${kilobytes(bytes)}; a design file may be at most ${kilobytes(UPLOAD_LIMIT_BYTES)}. A 16-state design needs a few KB: check that this is the right file.`;
  }
  if (bytes === 0) return `${name} is empty.`;
  return null;
}

/**
 * Reads an uploaded file's text: the model itself ({ A, C, Q, R, … }), or a revision as the
 * service answers it or takes it ({ model, notes }).
 */
export function readUpload(name: string, text: string): UploadReading {
  let parsed: unknown;
  try {
    parsed = JSON.parse(text.replace(/^\uFEFF/, ''));
  } catch (err) {
    return { ok: false, message: `${name} is not valid JSON: ${(err as Error).message}.` };
  }
  if (typeof parsed !== 'object' || parsed === null || Array.isArray(parsed)) {
    return { ok: false, message: `${name} holds ${Array.isArray(parsed) ? 'a list' : 'a single value'}, not a design model: write an object with the matrices A, C, Q and R (and optionally G, B, L, K and dt).` };
  }
  const o = parsed as Record<string, unknown>;
  if (!('A' in o) && typeof o['model'] === 'object' && o['model'] !== null && !Array.isArray(o['model'])) {
    return { ok: true, model: o['model'] as Record<string, unknown>, notes: typeof o['notes'] === 'string' ? o['notes'] : null };
  }
  return { ok: true, model: o, notes: null };
}

import { validateDesignModel } from '../../../../../shared/src/design/design-validation';
import {
  UPLOAD_LIMIT_BYTES,
  cellValue,
  draftFromModel,
  emptyDraft,
  expectedShape,
  fitMatrix,
  modelOf,
  placeProblems,
  readUpload,
  setCell,
  setDimension,
  setIncluded,
  uploadSizeProblem,
} from './revision-draft';

const tractor = {
  A: [[1, 0, 1, 0], [0, 1, 0, 1], [0, 0, 1, 0], [0, 0, 0, 1]],
  C: [[1, 0, 0, 0], [0, 1, 0, 0]],
  G: [[0.5, 0], [0, 0.5], [1, 0], [0, 1]],
  Q: [[0.05, 0], [0, 0.05]],
  R: [[0.25, 0], [0, 0.25]],
  dt: 1,
};

describe('revision draft', () => {
  it('starts as a one-state model that passes the check', () => {
    const d = emptyDraft();
    expect(modelOf(d)).toEqual({ A: [[1]], C: [[1]], Q: [[1]], R: [[1]] });
    expect(validateDesignModel(modelOf(d)).ok).toBe(true);
  });

  it('reads cells as numbers, empty cells as null and anything else as its text', () => {
    expect(cellValue(' 1.5e-3 ')).toBe(0.0015);
    expect(cellValue('−2')).toBe(-2); // a typographic minus, pasted from a report
    expect(cellValue('.5')).toBe(0.5);
    expect(cellValue('')).toBeNull();
    expect(cellValue('1,5')).toBe('1,5');
    expect(cellValue('0x10')).toBe('0x10');
  });

  it('resizes every matrix that follows a dimension, keeping the entries that still fit', () => {
    let d = draftFromModel(tractor);
    expect(d.dims).toEqual({ n: 4, m: 2, p: 2, r: 1 });
    d = setDimension(d, 'm', 1);
    expect(d.cells.C).toEqual([['1', '0', '0', '0']]);
    expect(d.cells.R).toEqual([['0.25']]);
    d = setDimension(d, 'n', 5);
    expect(d.cells.A[4]).toEqual(['0', '0', '0', '0', '0']);
    expect(d.cells.A[0]).toEqual(['1', '0', '1', '0', '0']);
    expect(d.cells.G).toHaveLength(5);
    expect(setDimension(d, 'n', 17)).toBe(d); // over the limit: nothing changes
    expect(setDimension(d, 'n', 0)).toBe(d);
  });

  it('makes Q follow G: p × p with G, n × n without', () => {
    let d = draftFromModel(tractor);
    expect(expectedShape(d, 'Q')).toEqual({ rows: 2, columns: 2, symbols: 'p × p' });
    d = setIncluded(d, 'G', false);
    expect(expectedShape(d, 'Q')).toEqual({ rows: 4, columns: 4, symbols: 'n × n' });
    expect(d.cells.Q).toHaveLength(4);
    expect(modelOf(d)['G']).toBeUndefined();
  });

  it('leaves K out while B is, and sizes B and K when B comes in', () => {
    let d = setIncluded(draftFromModel(tractor), 'K', true);
    expect(modelOf(d)['K']).toBeUndefined();
    d = setIncluded(d, 'B', true);
    expect(d.cells.B).toEqual([['0'], ['0'], ['0'], ['0']]);
    expect((modelOf(d)['K'] as unknown[][]).length).toBe(1);
  });

  it('keeps a matrix of the wrong size as it came, for the check to point at, until it is fitted', () => {
    let d = draftFromModel({ ...tractor, C: [[1, 0, 0], [0, 1, 0]] });
    const v = validateDesignModel(modelOf(d));
    expect(v.ok ? [] : v.problems.map((p) => p.path)).toEqual(['C']);
    d = fitMatrix(d, 'C');
    expect(d.cells.C).toEqual([['1', '0', '0', '0'], ['0', '1', '0', '0']]);
    expect(validateDesignModel(modelOf(d)).ok).toBe(true);
  });

  it('puts each problem beside its matrix, marks the cells at fault, and keeps the rest for the whole model', () => {
    const d = setCell(draftFromModel(tractor), 'A', 1, 2, 'abc');
    const v = validateDesignModel({ ...modelOf(d), extra: 1 });
    const placed = placeProblems(v.ok ? [] : v.problems);
    expect(placed.byMatrix.A).toEqual(['A row 2, column 3 must be a finite number, not the text "abc"']);
    expect([...(placed.cells.A ?? [])]).toEqual(['1.2']);
    expect(placed.general).toHaveLength(1);
    // The service's paths start with model.
    expect(placeProblems([{ path: 'model.R', message: 'R must be positive definite' }, { path: 'model.dt', message: 'dt must be > 0' }])).toMatchObject({
      byMatrix: { R: ['R must be positive definite'] },
      dt: ['dt must be > 0'],
    });
  });

  it('reads an uploaded file: a model, or a revision with notes; says what is wrong with a file that is neither', () => {
    expect(readUpload('m.json', JSON.stringify(tractor))).toEqual({ ok: true, model: tractor, notes: null });
    expect(readUpload('r.json', JSON.stringify({ model: tractor, notes: 'from the bench' }))).toEqual({ ok: true, model: tractor, notes: 'from the bench' });
    const broken = readUpload('broken.json', '{ "A": [[1, 0]');
    expect(broken.ok).toBe(false);
    expect(!broken.ok && broken.message).toMatch(/^broken\.json is not valid JSON: /);
    expect(readUpload('list.json', '[[1]]')).toEqual({ ok: false, message: expect.stringMatching(/^list\.json holds a list, not a design model/) });
  });

  it('refuses a file over 256 KB before reading it, saying both sizes', () => {
    expect(uploadSizeProblem('big.json', UPLOAD_LIMIT_BYTES + 1)).toMatch(/^big\.json is 257 KB; a design file may be at most 256 KB\./);
    expect(uploadSizeProblem('ok.json', UPLOAD_LIMIT_BYTES)).toBeNull();
    expect(uploadSizeProblem('empty.json', 0)).toBe('empty.json is empty.');
  });
});

// Validation of a design revision's model before it is stored: shapes, finite entries,
// symmetric positive (semi)definite Q and R, detectability and observability of (A, C),
// stabilizability of (A, B), limits; every problem reported with its path.
import { lqr } from '../src/design';
import { DESIGN_LIMITS, validateDesignModel, type DesignModel, type DesignProblem } from '../src/design/design-validation';

/** The demo's tractor design (ingest/src/demo/seed-demo.ts): constant velocity in x and y, positions measured, dt = 1 s. */
function tractor(): DesignModel {
  const A = [
    [1, 0, 1, 0],
    [0, 1, 0, 1],
    [0, 0, 1, 0],
    [0, 0, 0, 1],
  ];
  const G = [
    [0.5, 0],
    [0, 0.5],
    [1, 0],
    [0, 1],
  ];
  const { K } = lqr(A, G, [[1, 0, 0, 0], [0, 1, 0, 0], [0, 0, 0.1, 0], [0, 0, 0, 0.1]], [[1, 0], [0, 1]]);
  return {
    A,
    C: [
      [1, 0, 0, 0],
      [0, 1, 0, 0],
    ],
    G,
    B: G,
    Q: [
      [0.05, 0],
      [0, 0.05],
    ],
    R: [
      [0.25, 0],
      [0, 0.25],
    ],
    K,
    dt: 1,
  };
}

function problemsOf(input: unknown): DesignProblem[] {
  const v = validateDesignModel(input);
  if (v.ok) throw new Error('expected the model to be refused');
  return v.problems;
}

const paths = (input: unknown) => problemsOf(input).map((p) => p.path);

describe('validateDesignModel: a sound model', () => {
  it('accepts the demo tractor design with its dimensions, keeping only the parts of a model', () => {
    const v = validateDesignModel({ ...tractor() });
    expect(v).toMatchObject({ ok: true, stateDim: 4, measurementDim: 2, inputDim: 2, warnings: [] });
    if (!v.ok) return;
    expect(Object.keys(v.model).sort()).toEqual(['A', 'B', 'C', 'G', 'K', 'Q', 'R', 'dt']);
    expect(v.model.Q).toEqual(tractor().Q);
  });

  it('takes Q as n × n when there is no G (noise on every state), and no input dimension without B', () => {
    const v = validateDesignModel({ A: [[0.98]], C: [[1]], Q: [[0.01]], R: [[0.04]] });
    expect(v).toMatchObject({ ok: true, stateDim: 1, measurementDim: 1, inputDim: null, warnings: [] });
  });

  it('treats Q and R as symmetric within the tolerance (1e-9 of the largest entry) and null optional parts as absent', () => {
    const m = tractor();
    m.Q = [
      [0.05, 1e-3],
      [1e-3 + 1e-14, 0.05],
    ];
    expect(validateDesignModel({ ...m, L: null, dt: null }).ok).toBe(true);
  });
});

describe('validateDesignModel: refusals, every problem at once', () => {
  it('refuses what is not an object', () => {
    for (const input of [null, [], 'A = I', 3]) {
      expect(paths(input)).toEqual(['']);
    }
  });

  it('names each missing matrix and each unknown part', () => {
    const problems = problemsOf({ a: [[1]], notes: 'x' });
    expect(problems.map((p) => p.path)).toEqual(['a', 'notes', 'A', 'C', 'Q', 'R']);
    expect(problems[0].message).toMatch(/not part of a design model.*case-sensitive/);
    expect(problems[2].message).toBe('A (the state transition matrix) is required');
  });

  it('reports every wrong shape in one pass, each with what it must be and why', () => {
    const m = tractor();
    const problems = problemsOf({
      ...m,
      C: [[1, 0, 0]], // 1 × 3, n = 4
      G: [[1], [0], [0]], // 3 × 1
      Q: [[1, 0], [0, 1]], // G has 1 column: Q must be 1 × 1
      R: [[1, 0], [0, 1]], // m = 1
      L: [[1, 1]], // must be 4 × 1
      K: [[1, 0, 0, 0]], // B has 2 columns: must be 2 × 4
    });
    expect(problems.map((p) => p.path)).toEqual(['C', 'G', 'Q', 'R', 'L', 'K']);
    expect(problems.find((p) => p.path === 'C')?.message).toBe('C is 1 × 3; it must be 1 × 4 (one row per measured component, one column per state)');
    expect(problems.find((p) => p.path === 'Q')?.message).toMatch(/^Q is 2 × 2; it must be 1 × 1 /);
    expect(problems.find((p) => p.path === 'K')?.message).toMatch(/^K is 1 × 4; it must be 2 × 4 /);
  });

  it('refuses a non-square A without piling on problems that only follow from it', () => {
    const problems = problemsOf({ ...tractor(), A: [[1, 0, 1], [0, 1, 0], [0, 0, 1], [0, 0, 0]] });
    expect(problems).toEqual([{ path: 'A', message: 'A is 4 × 3; it must be square (one row and one column per state)' }]);
  });

  it('refuses Q of n × n when G is given, and wants it n × n without G', () => {
    const m = tractor();
    expect(paths({ ...m, Q: [[1, 0, 0, 0], [0, 1, 0, 0], [0, 0, 1, 0], [0, 0, 0, 1]] })).toEqual(['Q']);
    const { G: _g, B: _b, K: _k, ...noG } = m;
    expect(paths(noG)).toEqual(['Q']);
  });

  it('refuses K without B', () => {
    const { B: _b, ...noB } = tractor();
    expect(paths(noB)).toEqual(['K']);
  });

  it('refuses ragged rows and entries that are not finite numbers, with the entry’s path and a few at most per matrix', () => {
    const m = tractor();
    const problems = problemsOf({
      ...m,
      A: [[1, 0, 1, 0], [0, 1, 0], [0, 0, 1, 0], [0, 0, 0, 1]],
      Q: [[null, 0], [0, 'NaN']],
      R: [[Infinity, 0], [0, 0.25]],
      G: [[NaN, NaN], [NaN, NaN], [NaN, NaN], [NaN, NaN]],
    });
    expect(problems.map((p) => p.path)).toEqual(['A.1', 'G.0.0', 'G.0.1', 'G.1.0', 'G', 'Q.0.0', 'Q.1.1', 'R.0.0']);
    const message = (path: string) => problems.find((p) => p.path === path)?.message;
    expect(message('A.1')).toBe('A row 2 has 3 entries, row 1 has 4: every row must have as many');
    expect(message('Q.0.0')).toBe('Q row 1, column 1 must be a finite number, not empty (null)');
    expect(message('Q.1.1')).toBe('Q row 2, column 2 must be a finite number, not the text "NaN"');
    expect(message('R.0.0')).toBe('R row 1, column 1 must be a finite number, not Infinity');
    expect(message('G')).toBe('5 more problems like these in G');
  });

  it('refuses a matrix that is not a list of rows', () => {
    expect(problemsOf({ ...tractor(), R: 0.25 })).toEqual([
      { path: 'R', message: 'R must be a matrix: a list of rows, each a list of numbers (it is 0.25)' },
    ]);
    expect(paths({ ...tractor(), R: [] })).toEqual(['R']);
    expect(paths({ ...tractor(), R: [0.25, 0.25] })).toEqual(['R.0', 'R.1']);
  });

  it('refuses a sample period that is not a positive number', () => {
    for (const dt of [0, -1, '1', Infinity]) expect(paths({ ...tractor(), dt })).toEqual(['dt']);
  });

  it('refuses a non-symmetric Q, naming the worst pair', () => {
    const problems = problemsOf({ ...tractor(), Q: [[0.05, 0.01], [0.02, 0.05]] });
    expect(problems).toHaveLength(1);
    expect(problems[0].path).toBe('Q');
    expect(problems[0].message).toMatch(/^Q must be symmetric \(a covariance\): row 1, column 2 is 0\.01 but row 2, column 1 is 0\.02/);
  });

  it('refuses an indefinite Q (a negative variance direction), and an R that is only semidefinite or indefinite', () => {
    // eig([[1, 2], [2, 1]]) = {−1, 3}
    expect(problemsOf({ ...tractor(), Q: [[1, 2], [2, 1]] })).toEqual([
      { path: 'Q', message: 'Q must be positive semidefinite (a variance cannot be negative): the smallest eigenvalue of Q is -1' },
    ]);
    // A zero variance in Q is allowed (semidefinite), in R it is not.
    expect(validateDesignModel({ ...tractor(), Q: [[0.05, 0], [0, 0]] }).ok).toBe(true);
    const singular = problemsOf({ ...tractor(), R: [[0.25, 0], [0, 0]] });
    expect(singular.map((p) => p.path)).toEqual(['R']);
    expect(singular[0].message).toMatch(/^R must be positive definite \(every measured component needs some noise/);
    expect(paths({ ...tractor(), R: [[0.25, 0.5], [0.5, 0.25]] })).toEqual(['R']);
  });

  it('reports a non-symmetric and indefinite R as two problems', () => {
    expect(paths({ ...tractor(), R: [[-1, 0.5], [0, 0.25]] })).toEqual(['R', 'R']);
  });
});

describe('validateDesignModel: structure of (A, C) and (A, B)', () => {
  it('refuses the demo charge design (A = I₂, C = [1, 0.05]) as not observable: the mode λ = 1 is never seen', () => {
    // seed-demo.ts, cabinet-charge: rank [A − I; C] = rank C = 1 < 2 (see design-structure.spec.ts).
    const problems = problemsOf({ A: [[1, 0], [0, 1]], C: [[1, 0.05]], G: [[1, 0], [0, 1]], Q: [[1e-6, 0], [0, 1e-8]], R: [[1e-4]] });
    expect(problems).toHaveLength(1);
    expect(problems[0].path).toBe('C');
    expect(problems[0].message).toMatch(/^\(A, C\) is not observable, nor even detectable: the measurements never see the mode λ = 1, which does not decay/);
    expect(problems[0].message).toContain('the observable part has dimension 1 of 2 states');
  });

  it('accepts a detectable but unobservable pair with a warning that a retune study will refuse it', () => {
    // The second state decays by itself (λ = 0.5) and never reaches the measurement.
    const v = validateDesignModel({ A: [[0.9, 0], [0, 0.5]], C: [[1, 0]], Q: [[0.1, 0], [0, 0.1]], R: [[1]] });
    expect(v.ok).toBe(true);
    expect(v.warnings).toHaveLength(1);
    expect(v.warnings[0]).toMatch(/^\(A, C\) is detectable but not observable: the measurements never see the mode λ = 0\.5/);
    expect(v.warnings[0]).toContain('retune study');
  });

  it('refuses (A, B) that is not stabilizable and warns when it is stabilizable but not controllable', () => {
    const base = { C: [[1, 1]], Q: [[0.1, 0], [0, 0.1]], R: [[1]] };
    // The mode λ = 1.1 cannot be moved by B = [0; 1].
    const refused = problemsOf({ ...base, A: [[1.1, 0], [0, 0.5]], B: [[0], [1]] });
    expect(refused.map((p) => p.path)).toEqual(['B']);
    expect(refused[0].message).toMatch(/^\(A, B\) is not stabilizable: the inputs cannot move the mode λ = 1\.1/);
    const warned = validateDesignModel({ ...base, A: [[0.5, 0], [0, 1.1]], B: [[0], [1]] });
    expect(warned.ok).toBe(true);
    expect(warned.warnings).toEqual([expect.stringMatching(/^\(A, B\) is stabilizable but not controllable: the inputs cannot move the mode λ = 0\.5/)]);
  });

  it('warns when a stored gain L or K does not converge or does not stabilize', () => {
    const v = validateDesignModel({ ...tractor(), L: [[0, 0], [0, 0], [0, 0], [0, 0]], K: [[0, 0, 0, 0], [0, 0, 0, 0]] });
    expect(v.ok).toBe(true);
    expect(v.warnings).toEqual([
      expect.stringMatching(/^The predictor gain L does not make the filter converge: A − L·C has the pole λ = 1 /),
      expect.stringMatching(/^The regulator gain K does not stabilize the loop: A − B·K has the pole λ = 1 /),
    ]);
  });
});

describe('validateDesignModel: limits', () => {
  const eye = (k: number) => Array.from({ length: k }, (_, i) => Array.from({ length: k }, (_, j) => (i === j ? 1 : 0)));

  it(`refuses more than ${DESIGN_LIMITS.states} states and more than ${DESIGN_LIMITS.measurements} measured components`, () => {
    const n = DESIGN_LIMITS.states + 1;
    const problems = problemsOf({ A: eye(n), C: eye(n), Q: eye(n), R: eye(n) });
    expect(problems.map((p) => p.path)).toEqual(['A', 'C']);
    expect(problems[0].message).toBe('A gives 17 states; a design may have at most 16');
    expect(problems[1].message).toBe('C gives 17 measured components; a design may have at most 16');
  });

  it(`accepts ${DESIGN_LIMITS.states} states`, () => {
    const n = DESIGN_LIMITS.states;
    const A = eye(n).map((row) => row.map((x) => 0.9 * x));
    expect(validateDesignModel({ A, C: eye(n), Q: eye(n), R: eye(n) })).toMatchObject({ ok: true, stateDim: 16, measurementDim: 16 });
  });
});

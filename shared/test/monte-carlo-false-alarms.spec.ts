/**
 * False-alarm rates by Monte-Carlo on correctly tuned, seeded Kalman filters:
 * each window test's rejection count over non-overlapping (hence independent)
 * windows must lie in the central 99.9 % region of Binomial(windows, α), i.e.
 * α within the binomial confidence interval of the observed rate.
 */
import { ChiSquareWindowTest } from '../src/checks/chi-square-window-test';
import { EstimatorMonitor } from '../src/monitor/estimator-monitor';
import { sampleStatistics } from '../src/sample/normalized-errors';
import { binomialAcceptance } from './support/binomial-interval';
import { KalmanSimulation, LinearGaussianModel, constantVelocity2D, scalarRandomWalk } from './support/kalman-simulator';

const N = 100;
const WINDOWS = 500;
const alpha = 0.01;
const alphaMarginal = 0.05;

const models: [string, LinearGaussianModel, number][] = [
  ['a constant-velocity 2D tracker (m = 2)', constantVelocity2D(1e-3, 1), 2],
  ['a scalar random walk (m = 1)', scalarRandomWalk(1e-2, 1), 1],
];

describe.each(models)('false alarms of a correctly tuned filter: %s', (_, model, m) => {
  const counts = { nis: [0, 0], bias: [0, 0], whiteness: [0, 0] };
  let exceedances = 0;

  afterAll(() => {
    const rate = (c: number) => `${((100 * c) / WINDOWS).toFixed(1)} %`;
    console.log(
      `False alarms over ${WINDOWS} non-overlapping windows of N = ${N}, ${_}:\n` +
        (['nis', 'bias', 'whiteness'] as const).map((n) => `  ${n.padEnd(9)} at α = 1 %: ${rate(counts[n][0])}, at α = 5 %: ${rate(counts[n][1])}`).join('\n') +
        `\n  single NIS outside the 95 % interval: ${((100 * exceedances) / (WINDOWS * N)).toFixed(2)} %`,
    );
  });

  beforeAll(() => {
    const sim = new KalmanSimulation(model, 1234 + m);
    const monitor = new EstimatorMonitor({ windowLength: N, lags: 10, alpha, alphaMarginal });
    for (let w = 0; w < WINDOWS; w++) {
      for (let k = 0; k < N; k++) monitor.ingest(sim.step());
      const { checks } = monitor.report();
      for (const name of ['nis', 'bias', 'whiteness'] as const) {
        const verdict = checks![name].verdict;
        if (verdict === 'inconsistent') counts[name][0]++;
        if (verdict !== 'consistent') counts[name][1]++;
      }
      exceedances += checks!.nis.exceedances.count;
    }
  });

  it.each([
    ['nis', 'NIS window (two-sided χ²_{N·m})'],
    ['whiteness', 'whiteness (Ljung–Box, χ²_{L·m})'],
  ] as const)('%s, the %s test: rejections at α = 1 %% and 5 %% are within the binomial interval', (name, _description) => {
    for (const [level, a] of [
      [0, alpha],
      [1, alphaMarginal],
    ] as const) {
      const { lo, hi } = binomialAcceptance(WINDOWS, a);
      expect(counts[name][level]).toBeGreaterThanOrEqual(lo);
      expect(counts[name][level]).toBeLessThanOrEqual(hi);
    }
  });

  it('bias: rejections are within the binomial interval of the Bonferroni level 1 − (1 − α/m)^m', () => {
    for (const [level, a] of [
      [0, alpha],
      [1, alphaMarginal],
    ] as const) {
      const { lo, hi } = binomialAcceptance(WINDOWS, 1 - (1 - a / m) ** m);
      expect(counts.bias[level]).toBeGreaterThanOrEqual(lo);
      expect(counts.bias[level]).toBeLessThanOrEqual(hi);
    }
  });

  it('single NIS values fall outside their 95 % interval at the expected 5 % rate', () => {
    const { lo, hi } = binomialAcceptance(WINDOWS * N, alphaMarginal);
    expect(exceedances).toBeGreaterThanOrEqual(lo);
    expect(exceedances).toBeLessThanOrEqual(hi);
  });
});

describe('false alarms of the NEES window test', () => {
  const model = constantVelocity2D(1e-3, 1);

  it('rejects at the rate α when its N values come from N independent runs (Bar-Shalom’s N-run test)', () => {
    const runs = 20;
    const windows = 300;
    const counts = [0, 0];
    let seed = 1;
    for (let w = 0; w < windows; w++) {
      const test = new ChiSquareWindowTest({ windowLength: runs, dofPerSample: 4, alpha, alphaMarginal });
      for (let r = 0; r < runs; r++) {
        const sim = new KalmanSimulation(model, seed++);
        let raw = sim.step();
        for (let k = 0; k < 4; k++) raw = sim.step();
        test.push(sampleStatistics(raw).nees!);
      }
      const verdict = test.verdict();
      if (verdict === 'inconsistent') counts[0]++;
      if (verdict !== 'consistent') counts[1]++;
    }
    for (const [level, a] of [
      [0, alpha],
      [1, alphaMarginal],
    ] as const) {
      const { lo, hi } = binomialAcceptance(windows, a);
      expect(counts[level]).toBeGreaterThanOrEqual(lo);
      expect(counts[level]).toBeLessThanOrEqual(hi);
    }
  });

  it('rejects far more often than α on N consecutive values of one run, which is why the monitor keeps it out of the verdict by default', () => {
    const sim = new KalmanSimulation(model, 99);
    const windows = 200;
    let rejected = 0;
    for (let w = 0; w < windows; w++) {
      const test = new ChiSquareWindowTest({ windowLength: N, dofPerSample: 4, alpha, alphaMarginal });
      for (let k = 0; k < N; k++) test.push(sampleStatistics(sim.step()).nees!);
      if (test.verdict() === 'inconsistent') rejected++;
    }
    expect(rejected / windows).toBeGreaterThan(10 * alpha);
  });
});

/**
 * Detection by Monte-Carlo on mistuned, seeded Kalman filters: the filter keeps
 * its design while the simulated truth changes (measurement noise 2× or 0.5×
 * what the filter assumes, a measurement bias of one standard deviation,
 * process noise larger than the filter assumes). For each fault the check that
 * should see it must fire in at least 11 of 12 runs, and its detection delay
 * (samples from the fault to the check's first 'inconsistent') is bounded and
 * printed. The monitor runs with its defaults (N = 100, α = 0.001 / 0.01,
 * L = 10, CUSUM with ARL0 = 10000).
 */
import { CheckVerdicts, EstimatorMonitor } from '../src/monitor/estimator-monitor';
import { KalmanSimulation, LinearGaussianModel, constantVelocity2D, scalarRandomWalk, scaled } from './support/kalman-simulator';

const RUNS = 12;
const WARM = 300;
const HORIZON = 600;

type CheckName = 'nis' | 'bias' | 'whiteness' | 'cusum';
type Fault = (sim: KalmanSimulation) => void;

interface Outcome {
  /** Per check, the delay of each run (Infinity when it never fired). */
  delays: Record<CheckName, number[]>;
  /** The CUSUM's signalled direction per run, and whether the NIS window was above its bounds. */
  cusumDirections: string[];
  nisAbove: boolean[];
}

function median(values: number[]): number {
  const s = [...values].sort((a, b) => a - b);
  return s[Math.floor(s.length / 2)];
}

function runScenario(model: LinearGaussianModel, fault: Fault, seed: number): Outcome {
  const outcome: Outcome = { delays: { nis: [], bias: [], whiteness: [], cusum: [] }, cusumDirections: [], nisAbove: [] };
  for (let run = 0; run < RUNS; run++) {
    const sim = new KalmanSimulation(model, seed + run);
    const monitor = new EstimatorMonitor();
    for (let k = 0; k < WARM; k++) monitor.ingest(sim.step());
    fault(sim);
    const first: Partial<Record<CheckName, number>> = {};
    let direction = 'none';
    let above = false;
    for (let k = 1; k <= HORIZON; k++) {
      monitor.ingest(sim.step());
      const v = monitor.checkVerdicts() as CheckVerdicts;
      for (const name of ['nis', 'bias', 'whiteness', 'cusum'] as const) {
        if (v[name] === 'inconsistent' && first[name] === undefined) {
          first[name] = k;
          if (name === 'cusum') direction = monitor.report().checks!.cusum!.lastSignal!.direction;
          if (name === 'nis') {
            const nis = monitor.report().checks!.nis;
            above = nis.statistic > nis.bounds.upper;
          }
        }
      }
    }
    for (const name of ['nis', 'bias', 'whiteness', 'cusum'] as const) outcome.delays[name].push(first[name] ?? Infinity);
    outcome.cusumDirections.push(direction);
    outcome.nisAbove.push(above);
  }
  return outcome;
}

const table: string[] = [];

function expectDetection(outcome: Outcome, name: CheckName, maxMedianDelay: number, label: string): void {
  const delays = outcome.delays[name];
  const detected = delays.filter((d) => d <= HORIZON).length;
  table.push(`  ${label.padEnd(58)} ${name.padEnd(9)} detected ${String(detected).padStart(2)}/${RUNS}, median delay ${median(delays)} samples (max ${Math.max(...delays)})`);
  expect(detected).toBeGreaterThanOrEqual(RUNS - 1);
  expect(median(delays)).toBeLessThanOrEqual(maxMedianDelay);
}

afterAll(() => {
  console.log(`Detection delays (samples from the fault to the first 'inconsistent'; ${RUNS} runs each, defaults N = 100, α = 0.001):\n${table.join('\n')}`);
});

const doubleR: Fault = (sim) => {
  sim.Rtrue = scaled(sim.Rtrue, 2);
};
const halveR: Fault = (sim) => {
  sim.Rtrue = scaled(sim.Rtrue, 0.5);
};
const biasOneSigma: Fault = (sim) => {
  sim.bias = sim.bias.map((_, i) => (i === 0 ? Math.sqrt(sim.Rtrue[0][0]) : 0));
};
const processNoise = (factor: number): Fault => (sim) => {
  sim.Qtrue = scaled(sim.Qtrue, factor);
};

describe.each([
  ['constant-velocity 2D tracker', constantVelocity2D(1e-3, 1), 100],
  ['scalar random walk', scalarRandomWalk(1e-4, 1), 200],
] as const)('detection on a %s', (label, model, seed) => {
  it('measurement noise 2× what the filter assumes: the NIS window (above its bounds) and the upward CUSUM fire within 70 samples', () => {
    const outcome = runScenario(model, doubleR, seed);
    expectDetection(outcome, 'nis', 70, `${label}, R ×2`);
    expectDetection(outcome, 'cusum', 70, `${label}, R ×2`);
    expect(outcome.nisAbove.filter(Boolean).length).toBeGreaterThanOrEqual(RUNS - 1);
    expect(outcome.cusumDirections.filter((d) => d === 'up').length).toBeGreaterThanOrEqual(RUNS - 1);
  });

  it('measurement noise 0.5× what the filter assumes: the NIS window (below its bounds) and the downward CUSUM fire within 100 samples', () => {
    const outcome = runScenario(model, halveR, seed + 1000);
    expectDetection(outcome, 'nis', 100, `${label}, R ×0.5`);
    expectDetection(outcome, 'cusum', 100, `${label}, R ×0.5`);
    expect(outcome.nisAbove.filter((a) => !a).length).toBeGreaterThanOrEqual(RUNS - 1);
    expect(outcome.cusumDirections.filter((d) => d === 'down').length).toBeGreaterThanOrEqual(RUNS - 1);
  });
});

describe('detection of a measurement bias of one standard deviation', () => {
  // A bias that the filter's model can absorb (a position offset for a tracker,
  // a level for a random walk) only shows in the innovations while the
  // estimate catches up: about 1/K samples. It is detectable when the gain K is
  // small (a slowly varying state), as here; with a gain near 0.3 it is absorbed
  // within a few samples and no innovation test can see it afterwards (seen
  // here: on the tracker, q = 1e-6 gives a position gain 0.044 and the bias
  // test caught the bias in 3 of 12 runs).
  it('the bias test fires within 60 samples on a slowly varying scalar random walk (K ≈ 0.01)', () => {
    const outcome = runScenario(scalarRandomWalk(1e-4, 1), biasOneSigma, 300);
    expectDetection(outcome, 'bias', 60, 'scalar random walk (q/r = 1e-4), bias 1σ');
  });

  it('the bias test fires within 80 samples on a slowly manoeuvring constant-velocity tracker (position gain ≈ 0.014)', () => {
    const outcome = runScenario(constantVelocity2D(1e-8, 1), biasOneSigma, 400);
    expectDetection(outcome, 'bias', 80, 'constant-velocity tracker (q = 1e-8), bias 1σ on x');
  });
});

describe('detection of a process model mismatch (process noise in the truth larger than the filter assumes)', () => {
  it('the whiteness test fires within 120 samples on a constant-velocity tracker with 10× the process noise', () => {
    const outcome = runScenario(constantVelocity2D(1e-3, 1), processNoise(10), 500);
    expectDetection(outcome, 'whiteness', 120, 'constant-velocity tracker, Q ×10');
    expectDetection(outcome, 'nis', 150, 'constant-velocity tracker, Q ×10');
  });

  it('the whiteness test fires within 200 samples on a scalar random walk with 10× the process noise', () => {
    const outcome = runScenario(scalarRandomWalk(1e-2, 1), processNoise(10), 600);
    expectDetection(outcome, 'whiteness', 200, 'scalar random walk (q/r = 0.01), Q ×10');
  });
});

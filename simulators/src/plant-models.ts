// The simulated plants: one linear-Gaussian model per demo design, dt = 1 s,
//   x' = A·x + G·w,  w ~ N(0, Q)        z = C·x + v,  v ~ N(0, R)
// with the numbers of the demo designs (ingest/src/demo/seed-demo.ts, demoModel). The
// plant always runs the true noise (each design's revision 1, the bench tuning that
// matches the yard); a design revision changes only what the filter assumes.
import { demoDesigns } from '../../ingest/src/demo/saltmarsh';

export type PlantKind = 'tractor-position' | 'cabinet-thermal' | 'cabinet-charge';

export const plantKinds: readonly PlantKind[] = ['tractor-position', 'cabinet-thermal', 'cabinet-charge'];

/** A discrete linear-Gaussian model: A n×n, C m×n, G n×p, Q p×p, R m×m. */
export interface LinearGaussianModel {
  A: number[][];
  C: number[][];
  G: number[][];
  Q: number[][];
  R: number[][];
}

/** A plant, the filter that runs on it, and the filter's prior. */
export interface PlantDesign {
  kind: PlantKind;
  revision: number;
  /** Sample period in seconds. */
  dt: number;
  /** The plant: what really happens. */
  truth: LinearGaussianModel;
  /** What the filter assumes (same A, C, G; Q and R from the design revision). */
  filter: LinearGaussianModel;
  /** Prior mean x̂₀ and covariance P₀; the true initial state is drawn from N(x̂₀, P₀). */
  x0: number[];
  P0: number[][];
}

/** The model of a design with process noise intensity q (the numbers of seed-demo.ts). */
export function designModel(kind: PlantKind, q: number): LinearGaussianModel {
  switch (kind) {
    case 'tractor-position':
      // Constant velocity in x and y, state [x, y, vx, vy]; white-noise acceleration; positions measured.
      return {
        A: [
          [1, 0, 1, 0],
          [0, 1, 0, 1],
          [0, 0, 1, 0],
          [0, 0, 0, 1],
        ],
        C: [
          [1, 0, 0, 0],
          [0, 1, 0, 0],
        ],
        G: [
          [0.5, 0],
          [0, 0.5],
          [1, 0],
          [0, 1],
        ],
        Q: [
          [q, 0],
          [0, q],
        ],
        R: [
          [0.25, 0],
          [0, 0.25],
        ],
      };
    case 'cabinet-thermal':
      // First-order thermal model: temperature above ambient, relaxing with a = 0.98 per second.
      return { A: [[0.98]], C: [[1]], G: [[1]], Q: [[q]], R: [[0.04]] };
    case 'cabinet-charge':
      // State of charge and a slow voltage offset; the terminal voltage reads a linearised open-circuit curve.
      return {
        A: [
          [1, 0],
          [0, 1],
        ],
        C: [[1, 0.05]],
        G: [
          [1, 0],
          [0, 1],
        ],
        Q: [
          [q, 0],
          [0, 1e-8],
        ],
        R: [[1e-4]],
      };
  }
}

/** Process noise intensity q of a design revision, from the demo's design registry. */
export function revisionProcessNoise(kind: PlantKind, revision: number): number {
  const design = demoDesigns.find((d) => d.key === kind);
  const rev = design?.revisions.find((r) => r.revision === revision);
  if (!rev) {
    const known = design?.revisions.map((r) => r.revision).join(', ') ?? 'none';
    throw new RangeError(`design ${kind} has no revision ${revision} (revisions: ${known})`);
  }
  return rev.q;
}

function prior(kind: PlantKind): { x0: number[]; P0: number[][] } {
  switch (kind) {
    case 'tractor-position':
      // somewhere in the yard, standing; position known to a metre, speed to half a metre per second
      return {
        x0: [120, 40, 0, 0],
        P0: [
          [1, 0, 0, 0],
          [0, 1, 0, 0],
          [0, 0, 0.25, 0],
          [0, 0, 0, 0.25],
        ],
      };
    case 'cabinet-thermal':
      // the stationary variance of the true plant: q/(1 − a²) = 0.01/0.0396 ≈ 0.25
      return { x0: [0], P0: [[0.25]] };
    case 'cabinet-charge':
      return {
        x0: [0.8, 0],
        P0: [
          [1e-4, 0],
          [0, 1e-4],
        ],
      };
  }
}

/**
 * The plant and filter of a demo design revision: the plant runs revision 1's process
 * noise (the truth), the filter assumes the given revision's.
 */
export function plantDesign(kind: PlantKind, revision = 1): PlantDesign {
  const qTrue = revisionProcessNoise(kind, 1);
  const qAssumed = revisionProcessNoise(kind, revision);
  return {
    kind,
    revision,
    dt: 1,
    truth: designModel(kind, qTrue),
    filter: designModel(kind, qAssumed),
    ...prior(kind),
  };
}

export function isPlantKind(s: string): s is PlantKind {
  return (plantKinds as readonly string[]).includes(s);
}

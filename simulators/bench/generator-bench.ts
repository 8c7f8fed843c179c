// How fast the simulator makes innovation samples in one process: the plant, the full
// Kalman filter step (Riccati recursion included) and, separately, the JSON payload.
// Run: npx tsx simulators/bench/generator-bench.ts
import { singlePayload } from '../src/payload';
import { PlantFilter } from '../src/plant-filter';
import { plantDesign, plantKinds } from '../src/plant-models';

const N = 500_000;

function measure(label: string, step: () => unknown): void {
  for (let k = 0; k < 20_000; k++) step(); // warm-up
  const began = performance.now();
  for (let k = 0; k < N; k++) step();
  const seconds = (performance.now() - began) / 1000;
  console.log(`${label.padEnd(58)} ${Math.round(N / seconds).toLocaleString('en-US').padStart(10)} samples/s`);
}

for (const kind of plantKinds) {
  const withReference = new PlantFilter({ design: plantDesign(kind), seed: 1 });
  const bare = new PlantFilter({ design: plantDesign(kind), seed: 1, reference: false });
  const encoded = new PlantFilter({ design: plantDesign(kind), seed: 1 });
  measure(`${kind}: filter step, with e and P`, () => withReference.next());
  measure(`${kind}: filter step, without e and P`, () => bare.next());
  measure(`${kind}: filter step + JSON payload (with e and P)`, () => singlePayload(encoded.next(), { rev: 1 }));
}

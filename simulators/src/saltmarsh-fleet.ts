// The fleet the simulator runs: the Saltmarsh Terminal demo units (invented), extra
// synthetic tractors for scale, and the demo's fault schedule.
import { demoDeviceSecret, demoUnits } from '../../ingest/src/demo/saltmarsh';
import { parseFaultSpec, type FleetFault } from './faults';
import { isPlantKind, type PlantKind } from './plant-models';

export interface SimulatedEstimator {
  key: string;
  kind: PlantKind;
  /** The design revision the estimator runs (what its filter assumes). */
  revision: number;
}

export interface SimulatedUnit {
  key: string;
  /** MQTT password; the username is the unit key. */
  secret: string;
  estimators: SimulatedEstimator[];
}

/** The 52 demo units with their demo credentials (seeded by `npm run seed`). */
export function saltmarshUnits(): SimulatedUnit[] {
  return demoUnits.map((u) => ({
    key: u.key,
    secret: demoDeviceSecret(u.key),
    estimators: u.estimators.map((e) => {
      if (!isPlantKind(e.design)) throw new Error(`no simulated plant for design ${e.design}`);
      return { key: e.key, kind: e.design, revision: e.revision };
    }),
  }));
}

/**
 * Synthetic tractors beyond the demo (synthetic-tractor-00001, …), each with one
 * position estimator on design revision 1. The demo seed does not create them: the
 * broker refuses them until they are provisioned as units with a device credential
 * whose secret is `secretFor(key)` (by default the demo derivation, demoDeviceSecret).
 */
export function syntheticTractors(
  count: number,
  secretFor: (key: string) => string = demoDeviceSecret,
): SimulatedUnit[] {
  return Array.from({ length: count }, (_, i) => {
    const key = `synthetic-tractor-${String(i + 1).padStart(5, '0')}`;
    return { key, secret: secretFor(key), estimators: [{ key: 'position', kind: 'tractor-position', revision: 1 }] };
  });
}

/** n units: the first n demo units, or all 52 and synthetic tractors for the rest. */
export function fleetOfSize(n: number): SimulatedUnit[] {
  if (!Number.isInteger(n) || n < 1) throw new RangeError(`the fleet needs at least one unit, got ${n}`);
  const demo = saltmarshUnits();
  return n <= demo.length ? demo.slice(0, n) : demo.concat(syntheticTractors(n - demo.length));
}

/**
 * The demo's trouble, so a newcomer sees each kind within the first minutes (times
 * from the simulator's start). Tractors 33–40 need no entry: they run design revision
 * 2, whose filter assumes q = 0.0005 while the yard's process noise is 0.05.
 */
export const saltmarshFaultSpecs: readonly { spec: string; story: string }[] = [
  {
    spec: 'tractor-07/position:bias=2,flicker=6s@1m-3m/5m',
    story:
      'tractor-07 drives among the cranes 2 minutes in every 5: reflected signals put a 2 m offset on its x position that comes and goes as it passes each crane',
  },
  { spec: 'cabinet-04/thermal:noise=3@60s', story: "cabinet-04's temperature sensor grows noisier (×3) after 60 s" },
  { spec: 'cabinet-09:silence@90s', story: 'cabinet-09 goes silent after 90 s' },
  { spec: 'tractor-21/position:duplicate=0.03', story: 'tractor-21 repeats about 3% of its messages' },
  { spec: 'tractor-21/position:reorder=0.03', story: 'tractor-21 delivers about 3% of its samples late' },
  { spec: 'tractor-15/position:dropout=0.02', story: 'tractor-15 loses about 2% of its samples on a patchy radio link' },
  { spec: 'cabinet-06/charge:malformed=0.01', story: 'cabinet-06 sends a malformed payload now and then (about one in 100)' },
];

export function saltmarshFaults(): FleetFault[] {
  return saltmarshFaultSpecs.map((f) => parseFaultSpec(f.spec));
}

// The demo scenario (invented): Saltmarsh Terminal, a fictional container port.
// 40 autonomous yard tractors with a planar position/velocity estimator (2 measured
// components from satellite positioning), 12 battery cabinets each with a thermal
// estimator and a state-of-charge estimator (1 component each).
export interface DemoSite {
  key: string;
  name: string;
  timeZone: string;
}
export interface DemoUnit {
  key: string;
  name: string;
  kind: 'yard-tractor' | 'battery-cabinet';
  site: string;
  estimators: { key: string; design: string; revision: number; measurementDim: number }[];
}
export interface DemoUser {
  email: string;
  displayName: string;
  role: 'viewer' | 'responder' | 'designer' | 'admin';
  password: string;
}

export const demoSites: DemoSite[] = [
  { key: 'north-yard', name: 'North Yard', timeZone: 'Europe/Amsterdam' },
  { key: 'south-yard', name: 'South Yard', timeZone: 'Europe/Amsterdam' },
  { key: 'cabinet-row', name: 'Cabinet Row', timeZone: 'Europe/Amsterdam' },
];

export const demoDesigns = [
  {
    key: 'tractor-position',
    name: 'Tractor planar position/velocity',
    description: 'Constant-velocity model in x and y; satellite positioning measures both positions.',
    stateDim: 4,
    measurementDim: 2,
    revisions: [
      { revision: 1, notes: 'Bench tuning, in service across the yard.', q: 0.05 },
      { revision: 2, notes: 'Smoother track for the new firmware; process noise lowered.', q: 0.0005 },
    ],
  },
  {
    key: 'cabinet-thermal',
    name: 'Cabinet thermal',
    description: 'First-order thermal model of a battery cabinet; one temperature sensor.',
    stateDim: 1,
    measurementDim: 1,
    revisions: [{ revision: 1, notes: 'Bench tuning.', q: 0.01 }],
  },
  {
    key: 'cabinet-charge',
    name: 'Cabinet state of charge',
    description: 'Coulomb-counting model with a linearised open-circuit voltage; terminal voltage measured.',
    stateDim: 2,
    measurementDim: 1,
    revisions: [{ revision: 1, notes: 'Bench tuning.', q: 1e-6 }],
  },
];

function pad(n: number): string {
  return String(n).padStart(2, '0');
}

export const demoUnits: DemoUnit[] = [
  ...Array.from({ length: 40 }, (_, i): DemoUnit => ({
    key: `tractor-${pad(i + 1)}`,
    name: `Yard tractor ${pad(i + 1)}`,
    kind: 'yard-tractor',
    site: i < 20 ? 'north-yard' : 'south-yard',
    // Tractors 33 to 40 run the new design revision whose process noise is too low.
    estimators: [{ key: 'position', design: 'tractor-position', revision: i >= 32 ? 2 : 1, measurementDim: 2 }],
  })),
  ...Array.from({ length: 12 }, (_, i): DemoUnit => ({
    key: `cabinet-${pad(i + 1)}`,
    name: `Battery cabinet ${pad(i + 1)}`,
    kind: 'battery-cabinet',
    site: 'cabinet-row',
    estimators: [
      { key: 'thermal', design: 'cabinet-thermal', revision: 1, measurementDim: 1 },
      { key: 'charge', design: 'cabinet-charge', revision: 1, measurementDim: 1 },
    ],
  })),
];

/** Demo sign-ins, one per role. Printed by `npm start`; for the demo only. */
export const demoUsers: DemoUser[] = [
  { email: 'viewer@saltmarsh.example', displayName: 'Vera Oduya (operations)', role: 'viewer', password: 'saltmarsh-viewer' },
  { email: 'responder@saltmarsh.example', displayName: 'Ravi Castellan (on call)', role: 'responder', password: 'saltmarsh-responder' },
  { email: 'designer@saltmarsh.example', displayName: 'Dana Whitlow (estimator design)', role: 'designer', password: 'saltmarsh-designer' },
  { email: 'admin@saltmarsh.example', displayName: 'Ade Marsh (administrator)', role: 'admin', password: 'saltmarsh-admin' },
];

/**
 * Device credentials for the demo fleet simulator: derived from the unit key and a
 * demo-only salt so the simulator and the seed agree without a shared file.
 */
export function demoDeviceSecret(unitKey: string): string {
  return `demo-only-${unitKey}-saltmarsh`;
}

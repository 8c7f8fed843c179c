// The fleet simulator's command line (simulators/fleet.ts), parsed without I/O.
import { parseArgs } from 'node:util';
import { formatFaultSpec, parseDuration, parseFaultSpec, type FleetFault } from './faults';
import { MAX_BATCH_SIZE, type TimeFormat } from './payload';
import { saltmarshFaults, saltmarshFaultSpecs, saltmarshUnits } from './saltmarsh-fleet';

export interface CliOptions {
  help: boolean;
  url: string;
  rate: number;
  units: number;
  batchSize: number;
  faults: FleetFault[];
  demoFaults: boolean;
  /** Seconds to run; undefined runs until SIGINT/SIGTERM. */
  durationS: number | undefined;
  seed: number;
  reference: boolean;
  time: TimeFormat;
  /** Seconds between progress lines; 0 for none. */
  statsEveryS: number;
}

export class CliError extends Error {
  override readonly name = 'CliError';
}

export const DEMO_UNIT_COUNT = saltmarshUnits().length;
const DEMO_ESTIMATOR_COUNT = saltmarshUnits().reduce((n, u) => n + u.estimators.length, 0);

/** The broker URL from WHITECAP_MQTT_URL, else mqtt://127.0.0.1:${WHITECAP_MQTT_PORT ?? 1886}. */
export function defaultUrl(env: NodeJS.ProcessEnv): string {
  return env['WHITECAP_MQTT_URL'] ?? `mqtt://127.0.0.1:${env['WHITECAP_MQTT_PORT'] ?? 1886}`;
}

export function usage(env: NodeJS.ProcessEnv = {}): string {
  return `Whitecap fleet simulator: real Kalman filters on simulated plants, publishing their
innovations over MQTT. By default the Saltmarsh Terminal demo (${DEMO_UNIT_COUNT} units, ${DEMO_ESTIMATOR_COUNT} estimators,
1 sample/s each) with the demo's faults on a schedule.

usage: npm run simulate -- [options]

  --url <url>          MQTT broker (default ${defaultUrl(env)};
                       env WHITECAP_MQTT_URL, or WHITECAP_MQTT_PORT on 127.0.0.1)
  --rate <n>           samples per second per estimator (default 1)
  --units <n>          fleet size: the first n demo units, or all ${DEMO_UNIT_COUNT} and synthetic
                       tractors (synthetic-tractor-00001, …) beyond them (default ${DEMO_UNIT_COUNT}).
                       Only demo units have credentials after \`npm run seed\`; the broker
                       refuses synthetic tractors until they are provisioned as units with
                       a device credential (secret: demoDeviceSecret(key) in
                       ingest/src/demo/saltmarsh.ts)
  --batch <n>          samples per message, 1 to ${MAX_BATCH_SIZE}; more than 1 publishes the batch form
  --fault <spec>       add a fault (repeatable), e.g. tractor-07/position:bias=2@60s-180s
  --no-demo-faults     leave out the demo's fault schedule (a healthy fleet, plus any --fault)
  --duration <d>       stop after this long (90s, 10m, 1h); default: until Ctrl-C
  --seed <n>           seed of every plant, filter and fault draw (default 1)
  --no-reference       leave out e and P (the reference error for NEES)
  --time <format>      epoch-ms (default) or rfc3339
  --stats-every <d>    progress line interval (default 60s; 0 for none)
  -h, --help           this text

faults: <unit>[/<estimator>]:<kind>[=<value>][,<name>=<value>…][@<when>]
  <unit> may be *; without /<estimator> every estimator of the unit.
  noise=F              measurement noise standard deviation ×F
  bias=b               offset b on a measured component (component=i, default 0;
                       flicker=6s: on 6 s, off 6 s)
  qlow=F               the filter assumes process noise Q/F (the truth keeps its own)
  stuck                the sensor repeats its last reading
  dropout=f            a fraction f of samples is lost (sequence gaps)
  silence              nothing is published
  duplicate=f          a fraction f of messages is sent twice
  reorder=f            a fraction f of samples arrives after the next one
  malformed=f          a fraction f of samples is replaced by a malformed payload
                       (kinds=not-json+wrong-dimension+not-finite+not-positive-definite+missing-field)
  <when>: <from>[-<to>][/<every>] in time since start (60s, 2m), or #<k>[-#<k2>] by
  sequence number; windows are half-open. Without @ the fault is on from the start.

the demo's fault schedule:
${saltmarshFaultSpecs.map((f) => `  ${f.spec}\n      ${f.story}`).join('\n')}
  tractor-33 … tractor-40 run design revision 2: their filters assume q = 0.0005 while
      the yard's process noise is 0.05
`;
}

function positiveNumber(text: string, flag: string): number {
  const v = Number(text);
  if (!(Number.isFinite(v) && v > 0)) throw new CliError(`${flag} needs a positive number, got "${text}"`);
  return v;
}

function positiveInteger(text: string, flag: string): number {
  const v = positiveNumber(text, flag);
  if (!Number.isInteger(v)) throw new CliError(`${flag} needs a whole number, got "${text}"`);
  return v;
}

function duration(text: string, flag: string): number {
  try {
    return parseDuration(text);
  } catch (err) {
    throw new CliError(`${flag}: ${(err as Error).message}`);
  }
}

/** Parses argv (without node and the script). Throws CliError. */
export function parseCliOptions(argv: readonly string[], env: NodeJS.ProcessEnv): CliOptions {
  let values;
  try {
    ({ values } = parseArgs({
      args: [...argv],
      strict: true,
      allowPositionals: false,
      options: {
        help: { type: 'boolean', short: 'h' },
        url: { type: 'string' },
        rate: { type: 'string' },
        units: { type: 'string' },
        batch: { type: 'string' },
        fault: { type: 'string', multiple: true },
        'no-demo-faults': { type: 'boolean' },
        duration: { type: 'string' },
        seed: { type: 'string' },
        'no-reference': { type: 'boolean' },
        time: { type: 'string' },
        'stats-every': { type: 'string' },
      },
    }));
  } catch (err) {
    throw new CliError((err as Error).message);
  }
  const batchSize = values.batch === undefined ? 1 : positiveInteger(values.batch, '--batch');
  if (batchSize > MAX_BATCH_SIZE) throw new CliError(`--batch: a batch carries at most ${MAX_BATCH_SIZE} samples`);
  const time = values.time ?? 'epoch-ms';
  if (time !== 'epoch-ms' && time !== 'rfc3339') throw new CliError(`--time is epoch-ms or rfc3339, got "${time}"`);
  const seed = values.seed === undefined ? 1 : Number(values.seed);
  if (!Number.isInteger(seed)) throw new CliError(`--seed needs a whole number, got "${values.seed}"`);
  const demoFaults = !values['no-demo-faults'];
  const extra = (values.fault ?? []).map((spec) => {
    try {
      return parseFaultSpec(spec);
    } catch (err) {
      throw new CliError(`--fault ${(err as Error).message}`);
    }
  });
  const durationS = values.duration === undefined ? undefined : duration(values.duration, '--duration');
  if (durationS !== undefined && !(durationS > 0)) throw new CliError('--duration must be longer than zero');
  return {
    help: values.help ?? false,
    url: values.url ?? defaultUrl(env),
    rate: values.rate === undefined ? 1 : positiveNumber(values.rate, '--rate'),
    units: values.units === undefined ? DEMO_UNIT_COUNT : positiveInteger(values.units, '--units'),
    batchSize,
    faults: [...(demoFaults ? saltmarshFaults() : []), ...extra],
    demoFaults,
    durationS,
    seed,
    reference: !values['no-reference'],
    time,
    statsEveryS: values['stats-every'] === undefined ? 60 : duration(values['stats-every'], '--stats-every'),
  };
}

export function describeFaults(faults: readonly FleetFault[]): string[] {
  return faults.map(formatFaultSpec);
}

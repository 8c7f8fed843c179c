import { CliError, defaultUrl, parseCliOptions, usage } from './cli-options';
import { formatFaultSpec, parseFaultSpec } from './faults';
import { fleetOfSize, saltmarshFaultSpecs } from './saltmarsh-fleet';

describe('the fleet simulator command line', () => {
  it('defaults to the Saltmarsh demo with its fault schedule, 1 sample/s, single payloads, on the local broker', () => {
    const o = parseCliOptions([], {});
    expect(o).toMatchObject({
      help: false,
      url: 'mqtt://127.0.0.1:1886',
      rate: 1,
      units: 52,
      batchSize: 1,
      demoFaults: true,
      durationS: undefined,
      seed: 1,
      reference: true,
      time: 'epoch-ms',
      statsEveryS: 60,
    });
    expect(o.faults).toEqual(saltmarshFaultSpecs.map((f) => parseFaultSpec(f.spec)));
    expect(o.faults.map((f) => f.unit)).toEqual(['tractor-07', 'cabinet-04', 'cabinet-09', 'tractor-21', 'tractor-21', 'tractor-15', 'cabinet-06']);
  });

  it('takes the broker from WHITECAP_MQTT_URL, else WHITECAP_MQTT_PORT', () => {
    expect(defaultUrl({ WHITECAP_MQTT_PORT: '2999' })).toBe('mqtt://127.0.0.1:2999');
    expect(defaultUrl({ WHITECAP_MQTT_URL: 'mqtt://broker.example:1883', WHITECAP_MQTT_PORT: '2999' })).toBe('mqtt://broker.example:1883');
    expect(parseCliOptions(['--url', 'mqtt://10.0.0.5:1883'], { WHITECAP_MQTT_PORT: '2999' }).url).toBe('mqtt://10.0.0.5:1883');
  });

  it('reads every flag', () => {
    const o = parseCliOptions(
      [
        '--rate', '20', '--units', '500', '--batch', '100', '--no-demo-faults',
        '--fault', 'tractor-07/position:bias=2@60s-180s', '--fault', '*:dropout=0.01',
        '--duration', '10m', '--seed', '9', '--no-reference', '--time', 'rfc3339', '--stats-every', '5s',
      ],
      {},
    );
    expect(o).toMatchObject({ rate: 20, units: 500, batchSize: 100, demoFaults: false, durationS: 600, seed: 9, reference: false, time: 'rfc3339', statsEveryS: 5 });
    expect(o.faults.map(formatFaultSpec)).toEqual(['tractor-07/position:bias=2@1m-3m', '*:dropout=0.01']);
  });

  it.each([
    [['--rate', '0'], /--rate needs a positive number/],
    [['--units', '2.5'], /--units needs a whole number/],
    [['--batch', '1001'], /at most 1000/],
    [['--time', 'local'], /epoch-ms or rfc3339/],
    [['--duration', 'forever'], /--duration: "forever" is not a duration/],
    [['--fault', 'tractor-07:bias'], /--fault "tractor-07:bias": bias needs a value/],
    [['--colour'], /Unknown option '--colour'/],
  ])('refuses %j, saying why', (argv, message) => {
    expect(() => parseCliOptions(argv, {})).toThrow(CliError);
    expect(() => parseCliOptions(argv, {})).toThrow(message);
  });

  it('documents every flag and the demo schedule in --help', () => {
    const text = usage({});
    for (const flag of ['--url', '--rate', '--units', '--batch', '--fault', '--no-demo-faults', '--duration', '--seed', '--no-reference', '--time', '--stats-every']) {
      expect(text).toContain(flag);
    }
    for (const f of saltmarshFaultSpecs) expect(text).toContain(f.spec);
  });
});

describe('fleet size', () => {
  it('takes the first demo units, then adds synthetic tractors', () => {
    expect(fleetOfSize(3).map((u) => u.key)).toEqual(['tractor-01', 'tractor-02', 'tractor-03']);
    const big = fleetOfSize(55);
    expect(big).toHaveLength(55);
    expect(big.slice(52).map((u) => u.key)).toEqual(['synthetic-tractor-00001', 'synthetic-tractor-00002', 'synthetic-tractor-00003']);
    expect(big[52].estimators).toEqual([{ key: 'position', kind: 'tractor-position', revision: 1 }]);
    // tractors 33–40 run revision 2
    expect(big.filter((u) => u.estimators.some((e) => e.revision === 2)).map((u) => u.key)).toEqual(
      Array.from({ length: 8 }, (_, i) => `tractor-${33 + i}`),
    );
  });
});

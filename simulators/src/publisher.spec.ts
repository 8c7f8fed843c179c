import { Ajv2020 } from 'ajv/dist/2020';
import payloadSchema from '../../shared/src/payload/innovation-payload.schema.json';
import { startRecordingBroker, type RecordingBroker } from '../testing/recording-broker';
import { parseFaultSpec } from './faults';
import { ConnectionRefusedError, publishSamples, startFleet, UnitConnection } from './publisher';
import { saltmarshUnits, type SimulatedUnit } from './saltmarsh-fleet';

const validateSchema = new Ajv2020({ strict: false, validateFormats: false }).compile(payloadSchema);

type Payload = { v: 1; rev?: number; seq?: number; samples?: { seq: number }[] };

describe('the MQTT publisher, against a real broker', () => {
  // tractor-33 runs design revision 2; cabinet-01 has two estimators
  const units: SimulatedUnit[] = saltmarshUnits().filter((u) => ['tractor-01', 'tractor-33', 'cabinet-01'].includes(u.key));
  let broker: RecordingBroker;

  beforeAll(async () => {
    broker = await startRecordingBroker(Object.fromEntries(units.map((u) => [u.key, u.secret])));
  });
  afterAll(() => broker.stop());
  beforeEach(() => broker.clear());

  it('runs each unit on its own credentials and publishes every estimator at the rate asked, acknowledged', async () => {
    const fleet = startFleet({ url: broker.url, units, rate: 20 });
    await fleet.connected();
    await new Promise((r) => setTimeout(r, 1000));
    const stats = await fleet.stop();
    await broker.waitFor(stats.published);

    expect(stats.acked).toBe(stats.published);
    expect(stats.failed).toBe(0);
    expect(broker.messages).toHaveLength(stats.published);
    const byTopic = new Map<string, number[]>();
    for (const m of broker.messages) {
      // the recording broker, like the service's, accepts a unit only on its own topics
      expect(m.topic).toMatch(new RegExp(`^whitecap/v1/units/${m.unit}/estimators/[a-z]+/innovations$`));
      const p = JSON.parse(m.payload) as Payload;
      expect(validateSchema(p)).toBe(true);
      byTopic.set(m.topic, [...(byTopic.get(m.topic) ?? []), p.seq!]);
    }
    expect([...byTopic.keys()].sort()).toEqual([
      'whitecap/v1/units/cabinet-01/estimators/charge/innovations',
      'whitecap/v1/units/cabinet-01/estimators/thermal/innovations',
      'whitecap/v1/units/tractor-01/estimators/position/innovations',
      'whitecap/v1/units/tractor-33/estimators/position/innovations',
    ]);
    for (const seqs of byTopic.values()) {
      // about 20 samples in the second, numbered 1, 2, 3, … without gaps
      expect(seqs).toEqual(seqs.map((_, i) => i + 1));
      expect(seqs.length).toBeGreaterThanOrEqual(15);
      expect(seqs.length).toBeLessThanOrEqual(25);
    }
    const rev = (unit: string) => JSON.parse(broker.messages.find((m) => m.unit === unit)!.payload).rev;
    expect([rev('tractor-01'), rev('tractor-33')]).toEqual([1, 2]);
  });

  it('publishes the batch form, flushing part-filled batches at stop', async () => {
    const fleet = startFleet({ url: broker.url, units: units.slice(0, 1), rate: 50, batchSize: 10 });
    await fleet.connected();
    await new Promise((r) => setTimeout(r, 700));
    const stats = await fleet.stop();
    await broker.waitFor(stats.published);
    const batches = broker.messages.map((m) => JSON.parse(m.payload) as Payload);
    expect(batches.every((b) => validateSchema(b) && b.samples !== undefined)).toBe(true);
    expect(batches.slice(0, -1).every((b) => b.samples!.length === 10)).toBe(true);
    const seqs = batches.flatMap((b) => b.samples!.map((s) => s.seq));
    expect(seqs).toEqual(seqs.map((_, i) => i + 1));
    expect(seqs.length).toBe(stats.generated);
    expect(stats.samples).toBe(stats.generated);
  });

  it('applies message faults aimed at one estimator only', async () => {
    const fleet = startFleet({
      url: broker.url,
      units,
      rate: 100,
      faults: [parseFaultSpec('cabinet-01/charge:malformed=0.2,kinds=not-json'), parseFaultSpec('tractor-01:silence')],
    });
    await fleet.connected();
    await new Promise((r) => setTimeout(r, 800));
    const stats = await fleet.stop();
    await broker.waitFor(stats.published);
    const charge = broker.messages.filter((m) => m.topic.includes('cabinet-01/estimators/charge'));
    const notJson = charge.filter((m) => {
      try {
        JSON.parse(m.payload);
        return false;
      } catch {
        return true;
      }
    });
    expect(notJson.length).toBe(stats.malformed);
    expect(notJson.length).toBeGreaterThan(0);
    expect(broker.messages.filter((m) => m.unit === 'tractor-01')).toEqual([]);
    expect(broker.messages.filter((m) => m.topic.includes('/thermal/')).every((m) => validateSchema(JSON.parse(m.payload)))).toBe(true);
  });

  it('publishes 20,000 samples of one estimator and resolves once the broker has acknowledged them all', async () => {
    const result = await publishSamples({
      url: broker.url,
      unit: 'tractor-01',
      secret: units[0].secret,
      estimator: 'position',
      kind: 'tractor-position',
      count: 20_000,
      reference: false,
    });
    expect(result).toMatchObject({ generated: 20_000, samples: 20_000, published: 20_000, acked: 20_000 });
    await broker.waitFor(20_000);
    const seqs = broker.messages.map((m) => (JSON.parse(m.payload) as Payload).seq);
    expect(seqs).toEqual(Array.from({ length: 20_000 }, (_, i) => i + 1));
  });

  it('publishes in batches with sample-numbered faults on the model clock', async () => {
    const result = await publishSamples({
      url: broker.url,
      unit: 'cabinet-01',
      secret: units[2].secret,
      estimator: 'thermal',
      kind: 'cabinet-thermal',
      count: 5000,
      batchSize: 1000,
      clock: 'model',
      startTime: Date.UTC(2025, 5, 1),
      faults: [{ kind: 'dropout', fraction: 1, when: { fromSeq: 101, toSeq: 201 } }],
    });
    // 4900 samples in 5 batches
    expect(result).toMatchObject({ generated: 5000, samples: 4900, published: 5, acked: 5 });
    await broker.waitFor(5);
    const all = broker.messages.flatMap((m) => (JSON.parse(m.payload) as { samples: { seq: number; t: number }[] }).samples);
    expect(all.map((s) => s.seq)).toEqual([...Array.from({ length: 100 }, (_, i) => i + 1), ...Array.from({ length: 4800 }, (_, i) => i + 201)]);
    expect(all[0].t).toBe(Date.UTC(2025, 5, 1) + 1000);
    expect(all.at(-1)!.t).toBe(Date.UTC(2025, 5, 1) + 5000 * 1000);
  });

  it('says which unit the broker refused', async () => {
    const connection = new UnitConnection({ url: broker.url, unit: 'tractor-01', secret: 'not-the-secret' });
    await expect(connection.connected()).rejects.toThrow(ConnectionRefusedError);
    await expect(connection.connected()).rejects.toThrow(/tractor-01: the broker refused the connection \(bad username or secret/);
    await connection.close();

    const fleet = startFleet({ url: broker.url, units: [{ ...units[0], secret: 'wrong' }, units[1]], rate: 5 });
    await expect(fleet.connected()).rejects.toThrow(/tractor-01/);
    const stats = await fleet.stop();
    expect(stats).toMatchObject({ refused: 1 });
  });
});

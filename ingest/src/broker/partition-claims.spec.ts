import { fairShare, partitionClientId, planClaims } from './partition-claims';
import {
  innovationsTopic,
  parseInnovationsTopic,
  parsePartitionedInnovationsTopic,
  partitionFilter,
  partitionedInnovationsTopic,
  unitPartition,
} from './topics';

describe('partitioned topics', () => {
  it('builds and reads whitecap/v1/partitions/{p}/units/{unit}/estimators/{estimator}/innovations', () => {
    const t = partitionedInnovationsTopic(7, 'tractor-01', 'position');
    expect(t).toBe('whitecap/v1/partitions/7/units/tractor-01/estimators/position/innovations');
    expect(parsePartitionedInnovationsTopic(t)).toEqual({ partition: 7, unit: 'tractor-01', estimator: 'position' });
    expect(partitionFilter(7)).toBe('whitecap/v1/partitions/7/units/+/estimators/+/innovations');
    // The two forms do not read each other.
    expect(parseInnovationsTopic(t)).toBeNull();
    expect(parsePartitionedInnovationsTopic(innovationsTopic('tractor-01', 'position'))).toBeNull();
  });

  it('refuses partition levels that are not plain numbers and malformed keys', () => {
    for (const bad of [
      'whitecap/v1/partitions/07/units/a/estimators/b/innovations',
      'whitecap/v1/partitions/-1/units/a/estimators/b/innovations',
      'whitecap/v1/partitions/x/units/a/estimators/b/innovations',
      'whitecap/v1/partitions/+/units/a/estimators/b/innovations',
      'whitecap/v1/partitions/123456/units/a/estimators/b/innovations',
      'whitecap/v1/partitions/1/units/A/estimators/b/innovations',
      'whitecap/v1/partitions/1/units/a/estimators/b/innovations/x',
    ]) {
      expect(parsePartitionedInnovationsTopic(bad)).toBeNull();
    }
  });
});

describe('unitPartition', () => {
  it('is FNV-1a of the key modulo the count: stable values', () => {
    // FNV-1a 32-bit of "" is the offset basis 0x811c9dc5 = 2166136261; of "a" it is 0xe40c292c.
    expect(unitPartition('', 1_000_000_007)).toBe(2166136261 % 1_000_000_007);
    expect(unitPartition('a', 2 ** 31)).toBe(0xe40c292c % 2 ** 31);
    expect(unitPartition('a', 16)).toBe(0xe40c292c % 16);
  });

  it('spreads the demo tractors over the partitions and stays within the count', () => {
    const keys = Array.from({ length: 40 }, (_, i) => `tractor-${String(i + 1).padStart(2, '0')}`);
    const counts = new Array(8).fill(0);
    for (const k of keys) {
      const p = unitPartition(k, 8);
      expect(p).toBeGreaterThanOrEqual(0);
      expect(p).toBeLessThan(8);
      counts[p] += 1;
    }
    expect(counts.every((n) => n > 0)).toBe(true);
  });
});

describe('claims', () => {
  it("gives each worker ceil(partitions / live workers)", () => {
    expect(fairShare(16, 1)).toBe(16);
    expect(fairShare(16, 3)).toBe(6);
    expect(fairShare(8, 2)).toBe(4);
    expect(fairShare(8, 0)).toBe(8);
    expect(fairShare(4, 6)).toBe(1);
  });

  it('a lone worker claims every free partition, starting at its own place', () => {
    expect(planClaims({ partitions: 8, liveWorkers: 1, held: [], heldByOthers: [], start: 5 })).toEqual({ release: [], claim: [5, 6, 7, 0, 1, 2, 3, 4] });
  });

  it('a worker over its share after another joined releases the highest partitions, claiming nothing', () => {
    expect(planClaims({ partitions: 8, liveWorkers: 2, held: [0, 1, 2, 3, 4, 5, 6, 7], heldByOthers: [], start: 0 })).toEqual({ release: [7, 6, 5, 4], claim: [] });
  });

  it('the newcomer claims only free partitions, up to its share', () => {
    expect(planClaims({ partitions: 8, liveWorkers: 2, held: [], heldByOthers: [0, 1, 2, 3, 4, 5], start: 3 })).toEqual({ release: [], claim: [6, 7] });
    expect(planClaims({ partitions: 8, liveWorkers: 2, held: [6], heldByOthers: [0, 1, 2, 3], start: 0 })).toEqual({ release: [], claim: [4, 5, 7] });
  });

  it('a survivor whose partner died takes the partitions left free', () => {
    expect(planClaims({ partitions: 8, liveWorkers: 1, held: [0, 1, 2, 3], heldByOthers: [], start: 0 })).toEqual({ release: [], claim: [4, 5, 6, 7] });
  });

  it('at its share a worker does nothing', () => {
    expect(planClaims({ partitions: 16, liveWorkers: 3, held: [0, 1, 2, 3, 4, 5], heldByOthers: [6, 7, 8], start: 0 })).toEqual({ release: [], claim: [] });
  });

  it("names a partition's MQTT session after the partition, not the worker", () => {
    expect(partitionClientId('', 3)).toBe('whitecap-partition-3');
    expect(partitionClientId('fleet1-', 3)).toBe('fleet1-whitecap-partition-3');
  });
});

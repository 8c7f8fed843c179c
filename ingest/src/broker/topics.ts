// The topic scheme units publish on (documented in the README):
//   whitecap/v1/units/{unit}/estimators/{estimator}/innovations   samples, published by the unit
//   whitecap/v1/units/{unit}/commands                             commands, subscribed by the unit
// Behind an external broker with partitioned workers (docs/scaling.md), a unit publishes
// its innovations under its partition instead:
//   whitecap/v1/partitions/{p}/units/{unit}/estimators/{estimator}/innovations
// where p (0 ≤ p < WHITECAP_PARTITIONS) is the partition the unit got when it was provisioned.
// Unit and estimator keys are lower-case letters, digits, '-' and '_'.
export const TOPIC_ROOT = 'whitecap/v1/units';
export const PARTITIONS_ROOT = 'whitecap/v1/partitions';
const KEY = '[a-z0-9][a-z0-9_-]{0,63}';
/** A partition number as it appears in a topic: decimal, no leading zeros (units' partitions are smallint). */
const PARTITION = '0|[1-9][0-9]{0,4}';
const innovationsPattern = new RegExp(`^whitecap/v1/units/(${KEY})/estimators/(${KEY})/innovations$`);
const partitionedPattern = new RegExp(`^whitecap/v1/partitions/(${PARTITION})/units/(${KEY})/estimators/(${KEY})/innovations$`);

/** Partitions of a fleet unless WHITECAP_PARTITIONS says otherwise. */
export const DEFAULT_PARTITIONS = 16;

export function innovationsTopic(unit: string, estimator: string): string {
  return `${TOPIC_ROOT}/${unit}/estimators/${estimator}/innovations`;
}

export function commandsTopic(unit: string): string {
  return `${TOPIC_ROOT}/${unit}/commands`;
}

export interface InnovationsTopic {
  unit: string;
  estimator: string;
}

/** The unit and estimator a topic names, or null when it is not an innovations topic. */
export function parseInnovationsTopic(topic: string): InnovationsTopic | null {
  const m = innovationsPattern.exec(topic);
  return m ? { unit: m[1], estimator: m[2] } : null;
}

export function partitionedInnovationsTopic(partition: number, unit: string, estimator: string): string {
  return `${PARTITIONS_ROOT}/${partition}/units/${unit}/estimators/${estimator}/innovations`;
}

/** What the worker holding partition p subscribes to: every innovations topic of that partition. */
export function partitionFilter(partition: number): string {
  return `${PARTITIONS_ROOT}/${partition}/units/+/estimators/+/innovations`;
}

export interface PartitionedInnovationsTopic extends InnovationsTopic {
  partition: number;
}

/** The partition, unit and estimator of a partitioned innovations topic, or null. */
export function parsePartitionedInnovationsTopic(topic: string): PartitionedInnovationsTopic | null {
  const m = partitionedPattern.exec(topic);
  return m ? { partition: Number(m[1]), unit: m[2], estimator: m[3] } : null;
}

/**
 * The partition a unit is given when it is provisioned: FNV-1a (32 bits) of its key's
 * UTF-8 bytes, modulo the partition count. Stable across processes, versions and
 * machines; stored in units.partition, so changing this function or the count later
 * moves no existing unit.
 */
export function unitPartition(unitKey: string, partitions: number): number {
  let h = 0x811c9dc5;
  for (const byte of Buffer.from(unitKey, 'utf8')) {
    h ^= byte;
    h = Math.imul(h, 0x01000193) >>> 0;
  }
  return h % partitions;
}

export function isValidKey(key: string): boolean {
  return new RegExp(`^${KEY}$`).test(key);
}

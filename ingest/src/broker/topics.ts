// The topic scheme units publish on (documented in the README):
//   whitecap/v1/units/{unit}/estimators/{estimator}/innovations   samples, published by the unit
//   whitecap/v1/units/{unit}/commands                             commands, subscribed by the unit
// Unit and estimator keys are lower-case letters, digits, '-' and '_'.
export const TOPIC_ROOT = 'whitecap/v1/units';
const KEY = '[a-z0-9][a-z0-9_-]{0,63}';
const innovationsPattern = new RegExp(`^whitecap/v1/units/(${KEY})/estimators/(${KEY})/innovations$`);

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

export function isValidKey(key: string): boolean {
  return new RegExp(`^${KEY}$`).test(key);
}

// The service's own time comes from here, and only from here, so tests can move it.
export interface Clock {
  now(): number;
}

export const systemClock: Clock = { now: () => Date.now() };

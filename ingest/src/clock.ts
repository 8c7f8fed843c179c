// The service's own time comes from here, and only from here, so tests can move it.
export interface Clock {
  now(): number;
}

export const systemClock: Clock = { now: () => Date.now() };

/**
 * The system clock moved by a fixed offset (WHITECAP_CLOCK_OFFSET_MS, for tests that
 * run the service with its clock ahead of or behind the units'). 0 is the system clock.
 */
export function shiftedClock(offsetMs: number): Clock {
  return offsetMs === 0 ? systemClock : { now: () => Date.now() + offsetMs };
}

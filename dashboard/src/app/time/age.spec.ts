import { ageOf, formatAge, formatDuration } from './age';

describe('formatAge', () => {
  it('says how long ago in the largest sensible units', () => {
    expect(formatAge(null)).toBe('never');
    expect(formatAge(400)).toBe('just now');
    expect(formatAge(42_000)).toBe('42 s ago');
    expect(formatAge(7 * 60_000 + 5_000)).toBe('7 min ago');
    expect(formatAge(3 * 3_600_000 + 12 * 60_000)).toBe('3 h 12 min ago');
    expect(formatAge(2 * 86_400_000 + 4 * 3_600_000)).toBe('2 d 4 h ago');
    expect(formatDuration(3_600_000)).toBe('1 h');
  });

  it('measures the age of an ISO time against now', () => {
    expect(ageOf('2026-01-01T00:00:00Z', Date.parse('2026-01-01T00:01:00Z'))).toBe(60_000);
    expect(ageOf(null, 0)).toBeNull();
  });
});

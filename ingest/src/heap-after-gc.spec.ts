import { execFileSync } from 'node:child_process';
import path from 'node:path';

const MB = 1024 * 1024;

describe('afterFullGc', () => {
  it('reads the old generation after each full collection, and it follows what is kept', () => {
    // In a process of its own: the test runner's workers share their heap with other test files.
    const out = execFileSync(process.execPath, ['--expose-gc', '--import', 'tsx', path.join(__dirname, 'heap-after-gc.probe.ts')], {
      cwd: path.resolve(__dirname, '../..'),
      encoding: 'utf8',
      timeout: 30_000,
    });
    const r = JSON.parse(out.trim().split('\n').at(-1)!) as { base: number; withKept: number; after: number; keptCount: number; collections: number };
    expect(r.collections).toBeGreaterThanOrEqual(3);
    expect(r.base).toBeGreaterThan(0);
    // 500 arrays of 10,000 doubles (about 40 MB) alive through the second collection…
    expect(r.keptCount).toBe(500);
    expect(r.withKept - r.base).toBeGreaterThan(30 * MB);
    // …and let go before the third.
    expect(r.after - r.base).toBeLessThan(10 * MB);
  });
});

import v8 from 'node:v8';
import vm from 'node:vm';
import { afterFullGc } from './heap-after-gc';

// A full collection on demand, without starting jest with --expose-gc.
v8.setFlagsFromString('--expose-gc');
const fullGc = vm.runInNewContext('gc') as () => void;

/** A full collection, then waits (up to 5 s) for its observer entry to arrive. */
async function collect(): Promise<void> {
  const seen = afterFullGc().collections;
  fullGc();
  const until = Date.now() + 5000;
  while (afterFullGc().collections === seen && Date.now() < until) await new Promise((r) => setTimeout(r, 10));
}

describe('afterFullGc', () => {
  it('reads the old generation after each full collection, and it follows what is kept', async () => {
    afterFullGc();
    await collect();
    const before = afterFullGc();
    expect(before.collections).toBeGreaterThanOrEqual(1);
    const base = before.oldGenerationBytes;
    expect(base).toBeGreaterThan(0);
    const count = before.collections;

    // About 40 MB kept alive through the next collection.
    const kept: number[][] = Array.from({ length: 500 }, () => new Array<number>(10_000).fill(1.5));
    await collect();
    const withKept = afterFullGc();
    expect(withKept.collections).toBeGreaterThan(count);
    expect(withKept.oldGenerationBytes - base).toBeGreaterThan(30 * 1024 * 1024);

    // Let go of it: the next reading falls back.
    kept.length = 0;
    await collect();
    expect(afterFullGc().oldGenerationBytes - base).toBeLessThan(10 * 1024 * 1024);
  });
});

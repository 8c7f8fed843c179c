// Run by heap-after-gc.spec.ts in a process of its own (node --expose-gc), away from the
// test runner's heap: three full collections (nothing kept, ~40 MB kept, let go), each
// followed by the reading afterFullGc() made of it. Prints the readings as JSON.
import { afterFullGc } from './heap-after-gc';

const gc = (globalThis as { gc?: () => void }).gc;
if (!gc) throw new Error('run with --expose-gc');

async function collect(): Promise<number> {
  const seen = afterFullGc().collections;
  gc!();
  const until = Date.now() + 5000;
  while (afterFullGc().collections === seen && Date.now() < until) await new Promise((r) => setTimeout(r, 5));
  if (afterFullGc().collections === seen) throw new Error('no reading after a full collection');
  return afterFullGc().oldGenerationBytes;
}

async function main(): Promise<void> {
  afterFullGc();
  const base = await collect();
  let kept: number[][] = Array.from({ length: 500 }, () => new Array<number>(10_000).fill(1.5));
  const withKept = await collect();
  const keptCount = kept.length;
  kept = [];
  const after = await collect();
  console.log(JSON.stringify({ base, withKept, after, keptCount, keptNow: kept.length, collections: afterFullGc().collections }));
}

void main();

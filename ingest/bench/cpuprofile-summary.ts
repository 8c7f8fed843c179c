// Where a Node process spent its CPU, from a V8 .cpuprofile (node --cpu-prof): self time
// per function and per area (a package under node_modules, our folders, Node itself,
// the garbage collector). Used by `npm run bench:ingest -- --profile`; also runs alone:
//   npx tsx ingest/bench/cpuprofile-summary.ts <file.cpuprofile> [top]
import fs from 'node:fs';

interface ProfileNode {
  id: number;
  callFrame: { functionName: string; url: string; lineNumber: number };
  hitCount?: number;
}
interface CpuProfile {
  nodes: ProfileNode[];
  startTime: number;
  endTime: number;
  samples?: number[];
  timeDeltas?: number[];
}

export interface ProfileSummary {
  totalMs: number;
  /** Profile time not idle. */
  busyMs: number;
  areas: { area: string; ms: number; shareOfBusy: number }[];
  functions: { fn: string; where: string; ms: number; shareOfBusy: number }[];
}

function areaOf(url: string, fn: string): string {
  if (!url) {
    if (fn === '(idle)') return '(idle)';
    if (fn === '(garbage collector)') return 'garbage collector';
    if (fn === '(program)') return 'V8/Node native (program)';
    return `native ${fn}`;
  }
  const nm = url.lastIndexOf('node_modules/');
  if (nm >= 0) {
    const rest = url.slice(nm + 'node_modules/'.length).split('/');
    return rest[0].startsWith('@') ? `${rest[0]}/${rest[1]}` : rest[0];
  }
  if (url.startsWith('node:')) return 'Node core (' + url.slice(5).split('/')[0] + ')';
  for (const part of ['ingest/src/pipeline', 'ingest/src/broker', 'ingest/src', 'shared/src', 'simulators/src']) {
    if (url.includes(`/${part}/`)) return part;
  }
  return url.replace(/^file:\/\//, '');
}

export function summarizeProfile(file: string, top = 25): ProfileSummary {
  const p = JSON.parse(fs.readFileSync(file, 'utf8')) as CpuProfile;
  const byId = new Map(p.nodes.map((n) => [n.id, n]));
  const selfUs = new Map<number, number>();
  if (p.samples && p.timeDeltas) {
    // Each sample's time is the delta to the next sample.
    for (let i = 0; i < p.samples.length; i++) {
      const dt = p.timeDeltas[i + 1] ?? 0;
      selfUs.set(p.samples[i], (selfUs.get(p.samples[i]) ?? 0) + Math.max(0, dt));
    }
  }
  const totalUs = p.endTime - p.startTime;
  const areas = new Map<string, number>();
  const fns = new Map<string, { fn: string; where: string; us: number }>();
  for (const [id, us] of selfUs) {
    const n = byId.get(id)!;
    const { functionName, url, lineNumber } = n.callFrame;
    const fn = functionName || '(anonymous)';
    const area = areaOf(url, fn);
    areas.set(area, (areas.get(area) ?? 0) + us);
    const short = url.replace(/^.*\/(node_modules\/)/, '$1').replace(/^file:\/\/.*?\/(ingest|shared|simulators)\//, '$1/');
    const key = `${fn}@${short}:${lineNumber}`;
    const e = fns.get(key) ?? { fn, where: url ? `${short}:${lineNumber + 1}` : '', us: 0 };
    e.us += us;
    fns.set(key, e);
  }
  const idleUs = areas.get('(idle)') ?? 0;
  const busyUs = [...areas.values()].reduce((a, b) => a + b, 0) - idleUs;
  const share = (us: number) => (busyUs > 0 ? us / busyUs : 0);
  return {
    totalMs: totalUs / 1000,
    busyMs: busyUs / 1000,
    areas: [...areas.entries()]
      .filter(([a]) => a !== '(idle)')
      .sort((a, b) => b[1] - a[1])
      .map(([area, us]) => ({ area, ms: us / 1000, shareOfBusy: share(us) })),
    functions: [...fns.values()]
      .filter((f) => f.fn !== '(idle)')
      .sort((a, b) => b.us - a.us)
      .slice(0, top)
      .map((f) => ({ fn: f.fn, where: f.where, ms: f.us / 1000, shareOfBusy: share(f.us) })),
  };
}

if (process.argv[1] && /cpuprofile-summary\.ts$/.test(process.argv[1])) {
  const file = process.argv[2];
  if (!file) {
    console.error('usage: npx tsx ingest/bench/cpuprofile-summary.ts <file.cpuprofile> [top]');
    process.exit(2);
  }
  const s = summarizeProfile(file, Number(process.argv[3] ?? 30));
  console.log(`profile ${(s.totalMs / 1000).toFixed(1)} s, busy ${(s.busyMs / 1000).toFixed(1)} s`);
  console.log('\nby area (self time, share of busy):');
  for (const a of s.areas.slice(0, 20)) console.log(`  ${(a.shareOfBusy * 100).toFixed(1).padStart(5)} %  ${a.area}`);
  console.log('\nfunctions (self time):');
  for (const f of s.functions) console.log(`  ${(f.shareOfBusy * 100).toFixed(1).padStart(5)} %  ${f.fn}  ${f.where}`);
}

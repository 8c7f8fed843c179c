// CPU and memory of processes from /proc (Linux): utime + stime in clock ticks, VmRSS,
// the machine's busy time, and the children of a process (PostgreSQL's backends).
import { execFileSync } from 'node:child_process';
import fs from 'node:fs';

let ticks: number | null = null;
/** Clock ticks per second (getconf CLK_TCK; 100 on Linux by default). */
export function clockTicks(): number {
  if (ticks === null) {
    try {
      ticks = Number(execFileSync('getconf', ['CLK_TCK'], { encoding: 'utf8' }).trim()) || 100;
    } catch {
      ticks = 100;
    }
  }
  return ticks;
}

interface StatFields {
  ppid: number;
  utime: number;
  stime: number;
  /** utime + stime, ticks. */
  own: number;
  /** cutime + cstime: children that exited and were waited for, ticks. */
  reaped: number;
}

function readStat(pid: number): StatFields | null {
  let text: string;
  try {
    text = fs.readFileSync(`/proc/${pid}/stat`, 'utf8');
  } catch {
    return null;
  }
  // The command name (field 2) may hold spaces and parentheses: fields restart after the last ')'.
  const rest = text.slice(text.lastIndexOf(')') + 2).split(' ');
  // rest[0] is field 3 (state); field n is rest[n - 3].
  return {
    ppid: Number(rest[1]),
    utime: Number(rest[11]),
    stime: Number(rest[12]),
    own: Number(rest[11]) + Number(rest[12]),
    reaped: Number(rest[13]) + Number(rest[14]),
  };
}

/** CPU time of a process in seconds (its own, not its children's); null once it is gone. */
export function cpuSeconds(pid: number): number | null {
  const s = readStat(pid);
  return s ? s.own / clockTicks() : null;
}

/** User and system (kernel: syscalls, the loopback network) CPU seconds of a process. */
export function cpuSplit(pid: number): { user: number; system: number } | null {
  const s = readStat(pid);
  return s ? { user: s.utime / clockTicks(), system: s.stime / clockTicks() } : null;
}

/** Resident set size in bytes (VmRSS), or null. */
export function rssBytes(pid: number): number | null {
  try {
    const m = /^VmRSS:\s+(\d+)\s+kB/m.exec(fs.readFileSync(`/proc/${pid}/status`, 'utf8'));
    return m ? Number(m[1]) * 1024 : null;
  } catch {
    return null;
  }
}

/**
 * CPU seconds of a process tree: the root, its live children, and the children it has
 * already reaped (cutime/cstime). PostgreSQL's postmaster reaps its backends, so this
 * counts every backend, the checkpointer, the WAL writer and autovacuum workers.
 */
export function treeCpuSeconds(rootPid: number): number | null {
  const root = readStat(rootPid);
  if (!root) return null;
  let total = root.own + root.reaped;
  for (const name of fs.readdirSync('/proc')) {
    if (!/^\d+$/.test(name)) continue;
    const s = readStat(Number(name));
    if (s && s.ppid === rootPid) total += s.own + s.reaped;
  }
  return total / clockTicks();
}

/** The whole machine's busy and total CPU time (all cores) in seconds, from /proc/stat. */
export function machineCpuSeconds(): { busy: number; total: number } {
  const line = fs.readFileSync('/proc/stat', 'utf8').split('\n')[0];
  const v = line.trim().split(/\s+/).slice(1).map(Number);
  // user nice system idle iowait irq softirq steal guest guest_nice; guest time is already in user.
  const idle = v[3] + (v[4] ?? 0);
  const total = v.slice(0, 8).reduce((a, b) => a + b, 0);
  return { busy: (total - idle) / clockTicks(), total: total / clockTicks() };
}

/**
 * CPU seconds of each live child of a process by what it is (from its command line,
 * e.g. PostgreSQL's "walwriter", "checkpointer", "autovacuum worker", client backends),
 * plus "exited children" (reaped, cutime/cstime) and the root itself.
 */
export function childCpuByKind(rootPid: number, kindOf: (cmdline: string) => string): Map<string, number> {
  const out = new Map<string, number>();
  const add = (k: string, ticksUsed: number) => out.set(k, (out.get(k) ?? 0) + ticksUsed / clockTicks());
  const root = readStat(rootPid);
  if (!root) return out;
  add('main process', root.own);
  add('exited children', root.reaped);
  for (const name of fs.readdirSync('/proc')) {
    if (!/^\d+$/.test(name)) continue;
    const s = readStat(Number(name));
    if (!s || s.ppid !== rootPid) continue;
    let cmd = '';
    try {
      cmd = fs.readFileSync(`/proc/${name}/cmdline`, 'utf8').replace(/\0/g, ' ').trim();
    } catch {
      continue;
    }
    add(kindOf(cmd), s.own);
    if (s.reaped) add('exited children', s.reaped);
  }
  return out;
}

/** PostgreSQL's process titles ("postgres: walwriter", "postgres: whitecap whitecap 127.0.0.1(5432) idle") to a kind. */
export function postgresKind(cmdline: string): string {
  const title = cmdline.replace(/^postgres:\s*/, '');
  if (/^\S+ \S+ (\d+\.\d+\.\d+\.\d+|\[local\])/.test(title)) return 'client backends';
  return title.split(/\s+/).slice(0, 2).join(' ').replace(/\s+\d+$/, '');
}

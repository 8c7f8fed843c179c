// What the service keeps, read without disturbing it: the old generation right after
// each full (mark-compact) collection. The heap sampled at any other moment saws up and
// down with garbage and rises as V8 lets the old generation grow towards its limit; what
// is left after a full collection grows only when something is kept that should not be.
// The collection's own observer entry arrives a moment after it ends, so a little that
// was promoted since may be counted; the young generation is left out for that reason.
import { PerformanceObserver, constants, type PerformanceEntry } from 'node:perf_hooks';
import v8 from 'node:v8';

export interface AfterFullGc {
  /** Bytes in use in the old generation (every space but the young one) after the last full collection; NaN before the first. */
  oldGenerationBytes: number;
  /** Full collections seen since the watch began. */
  collections: number;
}

const last: AfterFullGc = { oldGenerationBytes: Number.NaN, collections: 0 };
let observer: PerformanceObserver | null = null;

const YOUNG = new Set(['new_space', 'new_large_object_space']);

/** Starts watching (once per process) and returns the latest reading. */
export function afterFullGc(): AfterFullGc {
  if (!observer) {
    observer = new PerformanceObserver((list) => {
      for (const entry of list.getEntries()) {
        const kind = (entry as PerformanceEntry & { detail?: { kind?: number } }).detail?.kind;
        if (kind !== constants.NODE_PERFORMANCE_GC_MAJOR) continue;
        let used = 0;
        for (const s of v8.getHeapSpaceStatistics()) if (!YOUNG.has(s.space_name)) used += s.space_used_size;
        last.oldGenerationBytes = used;
        last.collections += 1;
      }
    });
    observer.observe({ entryTypes: ['gc'] });
  }
  return last;
}

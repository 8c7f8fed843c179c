import { ChangeDetectionStrategy, Component, computed, input } from '@angular/core';
import type { WindowSummary } from '../../../../shared/src/api/api-types';

/** Formats a statistic for a table cell: 3 significant digits, no exponent for ordinary sizes. */
export function formatStat(x: number | null | undefined): string {
  if (x === null || x === undefined || !Number.isFinite(x)) return '—';
  const a = Math.abs(x);
  if (a !== 0 && (a < 0.001 || a >= 1e5)) return x.toExponential(2);
  return Number(x.toPrecision(3)).toString();
}

/** A p-value for reading: "≈ 0" when it underflowed, else as formatStat. */
export function formatP(p: number | null | undefined): string {
  return p === 0 ? '≈ 0' : formatStat(p);
}

/**
 * The windowed mean NIS against its expected value m, as "2.31 / 2", with a small bar:
 * the window mean's acceptance bounds shaded, m marked, the mean as a dot.
 */
@Component({
  selector: 'wc-nis-gauge',
  template: `
    @if (nis(); as n) {
      <span class="numbers">{{ format(n.average) }} / {{ format(n.expected) }}</span>
      <svg viewBox="0 0 100 12" preserveAspectRatio="none" aria-hidden="true" focusable="false">
        <rect x="0" y="4" width="100" height="4" rx="2" class="track" />
        <rect [attr.x]="x(n.averageBounds.lower)" y="2" [attr.width]="x(n.averageBounds.upper) - x(n.averageBounds.lower)" height="8" rx="2" class="band" />
        @if (n.expected !== null) {
          <rect [attr.x]="x(n.expected) - 0.75" y="0" width="1.5" height="12" class="expected" />
        }
        <circle [attr.cx]="x(n.average)" cy="6" r="3.4" class="mean" [class.outside]="outside()" />
      </svg>
    } @else {
      <span class="none">{{ window() ? 'window filling' : 'no samples' }}</span>
    }
  `,
  styles: `
    :host { display: inline-flex; align-items: center; gap: 8px; white-space: nowrap; }
    .numbers { font-variant-numeric: tabular-nums; min-width: 6.5ch; }
    svg { width: 72px; height: 12px; overflow: visible; }
    .track { fill: color-mix(in srgb, var(--mat-sys-on-surface) 12%, transparent); }
    .band { fill: color-mix(in srgb, var(--wc-teal-500) 40%, transparent); }
    .expected { fill: var(--mat-sys-on-surface); }
    .mean { fill: var(--wc-teal-700); stroke: var(--mat-sys-surface); stroke-width: 1; }
    .mean.outside { fill: var(--wc-magenta); }
    .none { color: var(--mat-sys-on-surface-variant); font-style: italic; }
  `,
  host: { '[attr.aria-label]': 'label()', role: 'img' },
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class NisGauge {
  readonly window = input<WindowSummary | null>(null);
  protected readonly nis = computed(() => {
    const n = this.window()?.nis;
    return n && n.ready ? n : null;
  });
  private readonly scaleMax = computed(() => {
    const n = this.nis();
    if (!n) return 1;
    return Math.max(n.averageBounds.upper * 1.5, (n.expected ?? 0) * 2, n.average * 1.05, 1e-9);
  });
  protected readonly outside = computed(() => {
    const n = this.nis();
    return !!n && (n.average < n.averageBounds.lower || n.average > n.averageBounds.upper);
  });
  protected readonly label = computed(() => {
    const n = this.nis();
    if (!n) return this.window() ? 'Window mean NIS: the window is still filling' : 'Window mean NIS: no samples yet';
    return `Window mean NIS ${formatStat(n.average)}, expected ${formatStat(n.expected)}, accepted from ${formatStat(n.averageBounds.lower)} to ${formatStat(n.averageBounds.upper)}${this.outside() ? ': outside its bounds' : ''}`;
  });

  protected format(x: number | null): string {
    return formatStat(x);
  }

  /** Position on the 0–100 bar (values beyond the scale sit at its end). */
  protected x(value: number | null): number {
    if (value === null) return 0;
    return Math.max(0, Math.min(100, (value / this.scaleMax()) * 100));
  }
}

import { ChangeDetectionStrategy, Component, computed, input } from '@angular/core';
import { inRotaAndViewerZone, viewerTimeZone } from './zoned-time';

/** A time as the rota reads it (its own time zone) and, when the viewer's clock differs, as the viewer reads it. */
@Component({
  selector: 'wc-two-zone-time',
  template: `
    <time [attr.datetime]="at()">{{ times().rota }}</time>
    @if (times().viewer; as mine) {
      <span class="mine">({{ mine }} your time)</span>
    }
  `,
  styles: `
    :host { display: inline; font-variant-numeric: tabular-nums; }
    .mine { margin-left: 4px; color: var(--mat-sys-on-surface-variant); font-size: 0.9em; white-space: nowrap; }
  `,
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class TwoZoneTime {
  readonly at = input.required<string | null>();
  /** The rota's IANA time zone. */
  readonly zone = input.required<string>();
  /** The viewer's zone (the browser's, unless a test sets it). */
  readonly viewerZone = input<string>(viewerTimeZone());
  protected readonly times = computed(() => inRotaAndViewerZone(this.at(), this.zone(), this.viewerZone()));
}

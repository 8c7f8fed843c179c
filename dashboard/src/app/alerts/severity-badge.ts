import { ChangeDetectionStrategy, Component, computed, input } from '@angular/core';
import type { AlertSeverity } from '../../../../shared/src/api/api-types';
import { SEVERITY_LOOK } from './severity-look';

/** An alert's severity as colour, shape and word together. */
@Component({
  selector: 'wc-severity-badge',
  template: `
    <svg viewBox="0 0 16 16" aria-hidden="true" focusable="false" [attr.data-shape]="look().shape">
      @switch (look().shape) {
        @case ('octagon') {
          <path d="M5.2 1 H10.8 L15 5.2 V10.8 L10.8 15 H5.2 L1 10.8 V5.2 Z" class="fill" />
          <rect x="7.1" y="4" width="1.8" height="5" class="mark" />
          <rect x="7.1" y="10.3" width="1.8" height="1.8" class="mark" />
        }
        @case ('triangle') {
          <path d="M8 1.5 L15 14.5 L1 14.5 Z" class="fill" />
        }
        @case ('disc') {
          <circle cx="8" cy="8" r="6" class="fill" />
        }
      }
    </svg>
    <span class="word">{{ look().word }}</span>
  `,
  styles: `
    :host {
      display: inline-flex;
      align-items: center;
      gap: 6px;
      padding: 2px 10px 2px 6px;
      border-radius: 4px;
      border: 1px solid color-mix(in srgb, var(--wc-badge-colour) 55%, transparent);
      background: color-mix(in srgb, var(--wc-badge-colour) 12%, transparent);
      color: var(--mat-sys-on-surface);
      font-size: 0.85rem;
      white-space: nowrap;
    }
    svg { width: 14px; height: 14px; flex: none; }
    .fill { fill: var(--wc-badge-colour); }
    .mark { fill: var(--mat-sys-surface); }
    .word { font-weight: 500; }
  `,
  host: {
    role: 'img',
    '[attr.aria-label]': '"Severity: " + look().word',
    '[style.--wc-badge-colour]': 'look().colour',
    '[attr.data-severity]': 'severity()',
  },
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class SeverityBadge {
  readonly severity = input.required<AlertSeverity>();
  protected readonly look = computed(() => SEVERITY_LOOK[this.severity()]);
}

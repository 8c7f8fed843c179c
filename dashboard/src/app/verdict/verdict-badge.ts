import { ChangeDetectionStrategy, Component, computed, input } from '@angular/core';
import type { EstimatorVerdict } from '../../../../shared/src/api/api-types';
import { VERDICT_LOOK } from './verdict-look';

/** A verdict as colour, shape and word together (never colour alone). */
@Component({
  selector: 'wc-verdict-badge',
  template: `
    <svg viewBox="0 0 16 16" aria-hidden="true" focusable="false" [attr.data-shape]="look().shape">
      @switch (look().shape) {
        @case ('disc') {
          <circle cx="8" cy="8" r="6" class="fill" />
        }
        @case ('triangle') {
          <path d="M8 1.5 L15 14.5 L1 14.5 Z" class="fill" />
        }
        @case ('diamond') {
          <path d="M8 0.8 L15.2 8 L8 15.2 L0.8 8 Z" class="fill" />
          <rect x="7.1" y="4" width="1.8" height="5" class="mark" />
          <rect x="7.1" y="10.2" width="1.8" height="1.8" class="mark" />
        }
        @case ('ring') {
          <circle cx="8" cy="8" r="5.6" class="line" />
          <path d="M4.5 8 H11.5" class="line" />
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
      border-radius: 12px;
      border: 1px solid color-mix(in srgb, var(--wc-badge-colour) 55%, transparent);
      background: color-mix(in srgb, var(--wc-badge-colour) 14%, transparent);
      color: var(--mat-sys-on-surface);
      font-size: 0.85rem;
      line-height: 1.4;
      white-space: nowrap;
    }
    :host(.large) { font-size: 1rem; padding: 4px 14px 4px 8px; border-radius: 16px; }
    :host(.large) svg { width: 18px; height: 18px; }
    svg { width: 14px; height: 14px; flex: none; }
    .fill { fill: var(--wc-badge-colour); }
    .mark { fill: var(--mat-sys-surface); }
    .line { fill: none; stroke: var(--wc-badge-colour); stroke-width: 2; }
    .word { font-weight: 500; }
  `,
  host: {
    role: 'img',
    '[attr.aria-label]': '"Verdict: " + look().word',
    '[attr.title]': 'look().meaning',
    '[style.--wc-badge-colour]': 'look().colour',
    '[attr.data-verdict]': 'verdict()',
    '[class.large]': 'size() === "large"',
  },
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class VerdictBadge {
  readonly verdict = input.required<EstimatorVerdict>();
  readonly size = input<'normal' | 'large'>('normal');
  protected readonly look = computed(() => VERDICT_LOOK[this.verdict()]);
}

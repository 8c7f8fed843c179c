import { ChangeDetectionStrategy, Component, computed, input } from '@angular/core';

/** How a check came out: met, a warning, a problem, or nothing to judge. */
export type MarkKind = 'ok' | 'warning' | 'problem' | 'neutral';

const LOOK: Record<MarkKind, { colour: string; shape: 'disc' | 'triangle' | 'diamond' | 'ring' }> = {
  ok: { colour: 'var(--wc-teal-500)', shape: 'disc' },
  warning: { colour: 'var(--wc-ochre)', shape: 'triangle' },
  problem: { colour: 'var(--wc-magenta)', shape: 'diamond' },
  neutral: { colour: 'var(--wc-ink-400)', shape: 'ring' },
};

/** A check's outcome in the workbench as colour, shape and word together (never colour alone). */
@Component({
  selector: 'wc-signal-mark',
  template: `
    <svg viewBox="0 0 16 16" aria-hidden="true" focusable="false" [attr.data-shape]="look().shape">
      @switch (look().shape) {
        @case ('disc') {
          <circle cx="8" cy="8" r="6.5" class="fill" />
          <path d="M4.8 8.2 L7 10.4 L11.3 5.8" class="tick" />
        }
        @case ('triangle') {
          <path d="M8 1.2 L15.2 14.6 L0.8 14.6 Z" class="fill" />
          <rect x="7.15" y="5.4" width="1.7" height="4.8" class="mark" />
          <rect x="7.15" y="11.4" width="1.7" height="1.7" class="mark" />
        }
        @case ('diamond') {
          <path d="M8 0.8 L15.2 8 L8 15.2 L0.8 8 Z" class="fill" />
          <rect x="7.15" y="4" width="1.7" height="5" class="mark" />
          <rect x="7.15" y="10.2" width="1.7" height="1.7" class="mark" />
        }
        @case ('ring') {
          <circle cx="8" cy="8" r="5.6" class="line" />
        }
      }
    </svg>
    <span class="word">{{ word() }}</span>
  `,
  styles: `
    :host {
      display: inline-flex;
      align-items: center;
      gap: 6px;
      padding: 1px 9px 1px 5px;
      border-radius: 4px;
      border: 1px solid color-mix(in srgb, var(--wc-mark-colour) 55%, transparent);
      background: color-mix(in srgb, var(--wc-mark-colour) 13%, transparent);
      font-size: 0.85rem;
      line-height: 1.5;
      white-space: nowrap;
      print-color-adjust: exact;
      -webkit-print-color-adjust: exact;
    }
    svg { width: 14px; height: 14px; flex: none; }
    .fill { fill: var(--wc-mark-colour); }
    .mark { fill: var(--mat-sys-surface); }
    .tick { fill: none; stroke: var(--mat-sys-surface); stroke-width: 1.8; stroke-linecap: round; stroke-linejoin: round; }
    .line { fill: none; stroke: var(--wc-mark-colour); stroke-width: 2; }
    .word { font-weight: 500; }
  `,
  host: {
    '[style.--wc-mark-colour]': 'look().colour',
    '[attr.data-mark]': 'kind()',
  },
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class SignalMark {
  readonly kind = input.required<MarkKind>();
  /** The word that says the outcome ("Meets floor", "Warning", …). */
  readonly word = input.required<string>();
  protected readonly look = computed(() => LOOK[this.kind()]);
}

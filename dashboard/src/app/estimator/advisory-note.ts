import { ChangeDetectionStrategy, Component } from '@angular/core';

/** The caution shown wherever a screen could lead someone to change an estimator. */
@Component({
  selector: 'wc-advisory-note',
  template: `
    <span class="material-symbols-outlined" aria-hidden="true">shield</span>
    <p>
      <strong>Advisory.</strong> Whitecap's verdicts are advice, not a release decision. A retuned estimator or regulator
      must be validated in simulation and through your organisation's own safety process before it reaches a machine;
      applicable codes and licensed engineering practice take precedence.
    </p>
  `,
  styles: `
    :host {
      display: flex;
      align-items: flex-start;
      gap: 10px;
      padding: 10px 14px;
      border-radius: 8px;
      border: 1px solid var(--mat-sys-outline-variant);
      background: color-mix(in srgb, var(--wc-sand-300) 22%, transparent);
      font-size: 0.9rem;
    }
    p { margin: 0; max-width: 110ch; }
    .material-symbols-outlined { color: var(--wc-teal-500); }
  `,
  host: { role: 'note', 'aria-label': 'Advisory' },
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class AdvisoryNote {}

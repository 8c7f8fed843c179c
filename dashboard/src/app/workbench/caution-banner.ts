import { ChangeDetectionStrategy, Component, input } from '@angular/core';

/** The study's caution, as the service words it: prominent on screen and kept on the printed report. */
@Component({
  selector: 'wc-caution-banner',
  template: `
    <svg viewBox="0 0 24 24" aria-hidden="true" focusable="false">
      <path d="M12 1.8 L21 5.4 V11.6 C21 17 17.2 20.9 12 22.2 C6.8 20.9 3 17 3 11.6 V5.4 Z" class="shield" />
      <rect x="11" y="6.6" width="2" height="7.6" rx="0.6" class="mark" />
      <rect x="11" y="15.8" width="2" height="2" rx="0.6" class="mark" />
    </svg>
    <div>
      <p class="head"><strong>Caution: advisory results</strong></p>
      <p class="text">{{ text() }}</p>
    </div>
  `,
  styles: `
    :host {
      display: flex;
      align-items: flex-start;
      gap: 14px;
      padding: 14px 18px;
      border-radius: 10px;
      border: 2px solid var(--wc-ochre);
      border-left-width: 8px;
      background: color-mix(in srgb, var(--wc-sand-300) 30%, var(--mat-sys-surface));
      color: var(--mat-sys-on-surface);
      break-inside: avoid;
      print-color-adjust: exact;
      -webkit-print-color-adjust: exact;
    }
    svg { width: 30px; height: 30px; flex: none; }
    .shield { fill: var(--wc-ochre); }
    .mark { fill: var(--mat-sys-surface); }
    p { margin: 0; max-width: 110ch; }
    .head { font: var(--mat-sys-title-medium); margin-bottom: 4px; }
    .text { font-size: 1rem; line-height: 1.5; }
  `,
  host: { role: 'note', 'aria-label': 'Caution' },
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class CautionBanner {
  readonly text = input.required<string>();
}

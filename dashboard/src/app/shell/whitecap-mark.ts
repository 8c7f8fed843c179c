import { ChangeDetectionStrategy, Component } from '@angular/core';

/** Whitecap's mark and name: a breaking wave under a rising signal. */
@Component({
  selector: 'wc-whitecap-mark',
  template: `
    <svg viewBox="0 0 32 32" role="img" aria-label="Whitecap">
      <rect width="32" height="32" rx="7" class="tile" />
      <path d="M4 20c4-6 8-6 12 0s8 6 12 0" class="wave" />
      <circle cx="24" cy="10" r="3" class="signal" />
    </svg>
    <span class="name">Whitecap</span>
  `,
  styles: `
    :host { display: inline-flex; align-items: center; gap: 12px; }
    svg { width: var(--wc-mark-size, 32px); height: var(--wc-mark-size, 32px); }
    .tile { fill: var(--wc-teal-900); stroke: var(--wc-sand-100); stroke-width: 1; }
    .wave { fill: none; stroke: var(--wc-sand-100); stroke-width: 3; stroke-linecap: round; }
    .signal { fill: var(--wc-ochre); }
    .name { font-size: calc(var(--wc-mark-size, 32px) * 0.6); font-weight: 500; letter-spacing: 0.02em; }
  `,
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class WhitecapMark {}

import { ChangeDetectionStrategy, Component, input } from '@angular/core';
import type { RevisionStatus } from './revisions-api';

const WORDS: Record<RevisionStatus, string> = { draft: 'Draft', released: 'Released', retired: 'Retired' };

/** A design revision's status as shape and word: a dashed ring (draft), a filled disc (released), a struck-through ring (retired). */
@Component({
  selector: 'wc-revision-status',
  template: `
    <svg viewBox="0 0 16 16" aria-hidden="true" focusable="false">
      @switch (status()) {
        @case ('draft') {
          <circle cx="8" cy="8" r="5.6" class="dashed" />
        }
        @case ('released') {
          <circle cx="8" cy="8" r="6.5" class="fill" />
          <path d="M4.8 8.2 L7 10.4 L11.3 5.8" class="tick" />
        }
        @case ('retired') {
          <circle cx="8" cy="8" r="5.6" class="line" />
          <path d="M4 12 L12 4" class="line" />
        }
      }
    </svg>
    <span>{{ words[status()] }}</span>
  `,
  styles: `
    :host {
      display: inline-flex;
      align-items: center;
      gap: 6px;
      font-size: 0.85rem;
      font-weight: 500;
      white-space: nowrap;
      --wc-status-colour: var(--wc-ink-400);
    }
    :host([data-status='released']) { --wc-status-colour: var(--wc-teal-500); }
    svg { width: 14px; height: 14px; flex: none; }
    .fill { fill: var(--wc-status-colour); }
    .tick { fill: none; stroke: var(--mat-sys-surface); stroke-width: 1.8; stroke-linecap: round; stroke-linejoin: round; }
    .line, .dashed { fill: none; stroke: var(--wc-status-colour); stroke-width: 2; }
    .dashed { stroke-dasharray: 3 2.2; }
  `,
  host: { '[attr.data-status]': 'status()' },
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class RevisionStatusMark {
  readonly status = input.required<RevisionStatus>();
  protected readonly words = WORDS;
}

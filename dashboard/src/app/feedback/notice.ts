import { ChangeDetectionStrategy, Component, computed, input, output } from '@angular/core';
import { MatButtonModule } from '@angular/material/button';

export type NoticeKind = 'loading' | 'empty' | 'error' | 'info';

/** A loading, empty, error or informational message, with an icon, the words, and an optional retry. */
@Component({
  selector: 'wc-notice',
  imports: [MatButtonModule],
  template: `
    <div class="notice" [class]="kind()" [attr.role]="kind() === 'error' ? 'alert' : 'status'">
      <span class="material-symbols-outlined" aria-hidden="true">{{ icon() }}</span>
      <span class="text">{{ message() }}<ng-content /></span>
      @if (retryLabel()) {
        <button mat-button type="button" (click)="retry.emit()">{{ retryLabel() }}</button>
      }
    </div>
  `,
  styles: `
    .notice {
      display: flex;
      align-items: center;
      gap: 12px;
      padding: 12px 16px;
      border-radius: 8px;
      border-left: 4px solid var(--wc-teal-500);
      background: color-mix(in srgb, var(--wc-teal-500) 8%, transparent);
    }
    .notice.error {
      border-left-color: var(--wc-magenta);
      background: color-mix(in srgb, var(--wc-magenta) 10%, transparent);
    }
    .notice.empty {
      border-left-color: var(--wc-sand-300);
      background: color-mix(in srgb, var(--wc-sand-300) 18%, transparent);
    }
    .text { flex: 1; }
    .loading .material-symbols-outlined { animation: spin 1.6s linear infinite; }
    @keyframes spin { to { transform: rotate(360deg); } }
    @media (prefers-reduced-motion: reduce) { .loading .material-symbols-outlined { animation: none; } }
  `,
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class Notice {
  readonly kind = input<NoticeKind>('info');
  readonly message = input('');
  /** Shows a button with this label that emits `retry`. */
  readonly retryLabel = input<string | null>(null);
  readonly retry = output<void>();
  protected readonly icon = computed(
    () => ({ loading: 'progress_activity', empty: 'inbox', error: 'error', info: 'info' })[this.kind()],
  );
}

import { HttpClient } from '@angular/common/http';
import { ChangeDetectionStrategy, Component, inject } from '@angular/core';
import { toSignal } from '@angular/core/rxjs-interop';
import { catchError, of, switchMap, timer } from 'rxjs';

interface HealthReport {
  status: 'ok' | 'degraded';
  database: { up: boolean; latencyMs?: number; error?: string };
  broker: { up: boolean; clients?: number; messagesReceived?: number; error?: string };
}

/** Whether the service's parts are up, checked every 30 seconds. */
@Component({
  selector: 'wc-service-status',
  template: `
    @if (health(); as h) {
      @if (h === 'unreachable') {
        <p class="down" role="status">
          <span class="material-symbols-outlined" aria-hidden="true">cloud_off</span> Service not answering; retrying.
        </p>
      } @else {
        <p [class.down]="!h.database.up" title="{{ h.database.error ?? '' }}">
          <span class="material-symbols-outlined" aria-hidden="true">{{ h.database.up ? 'check_circle' : 'error' }}</span>
          Database: {{ h.database.up ? 'up' : 'down' }}
        </p>
        <p [class.down]="!h.broker.up">
          <span class="material-symbols-outlined" aria-hidden="true">{{ h.broker.up ? 'check_circle' : 'error' }}</span>
          Broker: {{ h.broker.up ? 'up' : 'down' }}, {{ h.broker.clients ?? 0 }} units connected
        </p>
      }
    }
  `,
  styles: `
    :host { display: block; font-size: 0.8rem; opacity: 0.9; }
    p { display: flex; align-items: center; gap: 6px; margin: 4px 0; }
    .material-symbols-outlined { font-size: 16px; }
    .down { color: #f6b6d4; }
  `,
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class ServiceStatus {
  private readonly http = inject(HttpClient);
  protected readonly health = toSignal(
    timer(0, 30_000).pipe(
      switchMap(() =>
        this.http.get<HealthReport>('/api/health').pipe(
          // 503 still carries the report.
          catchError((err) => of(err?.error?.database ? (err.error as HealthReport) : ('unreachable' as const))),
        ),
      ),
    ),
  );
}

import { HttpClient } from '@angular/common/http';
import { ChangeDetectionStrategy, Component, inject } from '@angular/core';
import { toSignal } from '@angular/core/rxjs-interop';
import { catchError, of, startWith, switchMap, timer } from 'rxjs';
import { Session } from '../auth/session';

interface HealthReport {
  status: 'ok' | 'degraded';
  database: { up: boolean; latencyMs?: number; error?: string };
  broker: { up: boolean; clients?: number; messagesReceived?: number; error?: string };
}

/** The landing page: who is signed in, and whether the service's parts are up. */
@Component({
  selector: 'wc-welcome',
  template: `
    <h1>Welcome, {{ user()?.displayName }}</h1>
    <section aria-labelledby="service-title">
      <h2 id="service-title">Service</h2>
      @if (health(); as h) {
        @if (h === 'unreachable') {
          <p role="alert">The service does not answer. It may be restarting; this page retries every 10 seconds.</p>
        } @else {
          <ul>
            <li>Database: {{ h.database.up ? 'up' : 'down' }}{{ h.database.error ? ' (' + h.database.error + ')' : '' }}</li>
            <li>
              MQTT broker: {{ h.broker.up ? 'up' : 'down' }}, {{ h.broker.clients ?? 0 }} units connected,
              {{ h.broker.messagesReceived ?? 0 }} messages received
            </li>
          </ul>
        }
      } @else {
        <p>Checking the service…</p>
      }
    </section>
  `,
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class Welcome {
  private readonly http = inject(HttpClient);
  protected readonly user = inject(Session).user;
  protected readonly health = toSignal(
    timer(0, 10_000).pipe(
      switchMap(() =>
        this.http.get<HealthReport>('/api/health').pipe(
          // 503 still carries the report.
          catchError((err) => of(err?.error?.database ? (err.error as HealthReport) : ('unreachable' as const))),
        ),
      ),
      startWith(null),
    ),
  );
}

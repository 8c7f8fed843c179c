// For component tests: a LiveEvents without a connection, whose events a test pushes.
import { Provider, signal } from '@angular/core';
import { Subject, filter, map } from 'rxjs';
import type { AlertChange, VerdictChange } from '../../../../shared/src/api/api-types';
import type { LiveStatus } from './event-stream';
import { LiveEvents, type ServerEvent } from './live-events';

export class LiveEventsStub {
  readonly push = new Subject<ServerEvent>();
  readonly status = signal<LiveStatus>('open').asReadonly();
  readonly events$ = this.push.asObservable();
  readonly verdicts$ = this.events$.pipe(
    filter((e) => e.type === 'verdict'),
    map((e) => e.data as VerdictChange),
  );
  readonly alerts$ = this.events$.pipe(
    filter((e) => e.type === 'alert'),
    map((e) => e.data as AlertChange),
  );
}

export function provideLiveEventsStub(stub = new LiveEventsStub()): Provider {
  return { provide: LiveEvents, useValue: stub };
}

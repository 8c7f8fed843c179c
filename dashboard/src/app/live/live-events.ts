import { Injectable, inject, signal } from '@angular/core';
import { Observable, filter, map, share } from 'rxjs';
import type { AlertChange, VerdictChange } from '../../../../shared/src/api/api-types';
import { Session } from '../auth/session';
import { eventStream, type LiveStatus, type StreamResponse } from './event-stream';
import type { SseMessage } from './sse-parser';

export type ServerEvent = { type: 'verdict'; data: VerdictChange } | { type: 'alert'; data: AlertChange };

/** The typed event for an SSE message, or null for an event type or data this app does not know. */
export function toServerEvent(message: SseMessage): ServerEvent | null {
  if (message.event !== 'verdict' && message.event !== 'alert') return null;
  try {
    const data: unknown = JSON.parse(message.data);
    if (typeof data !== 'object' || data === null) return null;
    return { type: message.event, data } as ServerEvent;
  } catch {
    return null;
  }
}

/**
 * The service's live events (GET /api/events), one connection shared by every screen
 * that listens; it opens with the first listener and closes with the last.
 */
@Injectable({ providedIn: 'root' })
export class LiveEvents {
  private readonly session = inject(Session);
  private readonly state = signal<LiveStatus>('connecting');
  readonly status = this.state.asReadonly();

  readonly events$: Observable<ServerEvent> = eventStream((signal) => this.connect(signal), {
    onStatus: (s) => this.state.set(s),
    onUnauthorized: () => this.session.refresh(),
  }).pipe(
    map(toServerEvent),
    filter((e): e is ServerEvent => e !== null),
    share(),
  );

  readonly verdicts$: Observable<VerdictChange> = this.events$.pipe(
    filter((e): e is Extract<ServerEvent, { type: 'verdict' }> => e.type === 'verdict'),
    map((e) => e.data),
  );

  readonly alerts$: Observable<AlertChange> = this.events$.pipe(
    filter((e): e is Extract<ServerEvent, { type: 'alert' }> => e.type === 'alert'),
    map((e) => e.data),
  );

  private connect(signal: AbortSignal): Promise<StreamResponse> {
    const token = this.session.token();
    if (!token) return Promise.reject(new Error('not signed in'));
    return fetch('/api/events', {
      headers: { Authorization: `Bearer ${token}`, Accept: 'text/event-stream' },
      credentials: 'same-origin',
      cache: 'no-store',
      signal,
    });
  }
}

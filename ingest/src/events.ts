// In-process events for the live stream (dashboard) and the notification side.
import { EventEmitter } from 'node:events';

export interface VerdictEvent {
  estimatorId: number;
  unitId: number;
  verdict: 'consistent' | 'marginal' | 'inconsistent' | 'silent';
  previous: 'consistent' | 'marginal' | 'inconsistent' | 'silent';
  atMs: number;
}

export interface AlertEvent {
  kind: 'open' | 'clear' | 'acknowledged' | 'note' | 'resolved';
  /** Known for actions on a stored alert; the pipeline's own events name the estimator and rule. */
  alertId?: number;
  actor?: string;
  estimatorId: number | null;
  unitId: number | null;
  rule: string;
  severity?: string;
  summary?: string;
  atMs: number;
}

interface EventMap {
  verdict: [VerdictEvent];
  alert: [AlertEvent];
}

export class ServiceEvents extends EventEmitter<EventMap> {
  constructor() {
    super();
    // Every dashboard on the live stream adds a listener.
    this.setMaxListeners(0);
  }
}

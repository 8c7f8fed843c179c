import { HttpClient, HttpParams } from '@angular/common/http';
import { Injectable, inject, signal } from '@angular/core';
import { Observable, tap } from 'rxjs';
import type { AlertDetail, AlertList, AlertSeverity, AlertState } from '../../../../shared/src/api/api-types';

export type AlertSort = 'openedAt' | 'severity' | 'state' | 'rule' | 'unit';

export interface AlertQuery {
  state: AlertState | 'live' | '';
  severity: AlertSeverity | '';
  q: string;
  sort: AlertSort;
  order: 'asc' | 'desc';
  pageIndex: number;
  pageSize: number;
}

/** The query string of GET /api/alerts; empty filters are left out. */
export function alertParams(query: AlertQuery): HttpParams {
  let params = new HttpParams()
    .set('sort', query.sort)
    .set('order', query.order)
    .set('limit', query.pageSize)
    .set('offset', query.pageIndex * query.pageSize);
  if (query.state) params = params.set('state', query.state);
  if (query.severity) params = params.set('severity', query.severity);
  if (query.q.trim()) params = params.set('q', query.q.trim());
  return params;
}

/** The alert inbox's calls; `changed` counts the actions taken here, for lists to refresh. */
@Injectable({ providedIn: 'root' })
export class AlertsApi {
  private readonly http = inject(HttpClient);
  private readonly actions = signal(0);
  readonly changed = this.actions.asReadonly();

  list(query: AlertQuery): Observable<AlertList> {
    return this.http.get<AlertList>('/api/alerts', { params: alertParams(query) });
  }

  detail(id: number): Observable<AlertDetail> {
    return this.http.get<AlertDetail>(`/api/alerts/${id}`);
  }

  acknowledge(id: number, note?: string): Observable<AlertDetail> {
    return this.act(`/api/alerts/${id}/acknowledge`, note ? { note } : {});
  }

  addNote(id: number, text: string): Observable<AlertDetail> {
    return this.act(`/api/alerts/${id}/notes`, { text });
  }

  resolve(id: number, note?: string): Observable<AlertDetail> {
    return this.act(`/api/alerts/${id}/resolve`, note ? { note } : {});
  }

  private act(url: string, body: object): Observable<AlertDetail> {
    return this.http.post<AlertDetail>(url, body).pipe(tap(() => this.actions.update((n) => n + 1)));
  }
}

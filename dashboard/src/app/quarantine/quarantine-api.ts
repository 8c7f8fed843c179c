import { HttpClient, HttpParams } from '@angular/common/http';
import { Injectable, inject } from '@angular/core';
import { Observable } from 'rxjs';
import type { Page, QuarantineItem, QuarantineSummary } from '../../../../shared/src/api/api-types';

export interface QuarantineQuery {
  unit: string;
  reason: string;
  q: string;
  pageIndex: number;
  pageSize: number;
}

/** The quarantine screen's calls. */
@Injectable({ providedIn: 'root' })
export class QuarantineApi {
  private readonly http = inject(HttpClient);

  summary(hours: number): Observable<QuarantineSummary> {
    return this.http.get<QuarantineSummary>('/api/quarantine/summary', { params: new HttpParams().set('hours', hours) });
  }

  list(query: QuarantineQuery): Observable<Page<QuarantineItem>> {
    let params = new HttpParams().set('limit', query.pageSize).set('offset', query.pageIndex * query.pageSize);
    if (query.unit) params = params.set('unit', query.unit);
    if (query.reason) params = params.set('reason', query.reason);
    if (query.q.trim()) params = params.set('q', query.q.trim());
    return this.http.get<Page<QuarantineItem>>('/api/quarantine', { params });
  }
}

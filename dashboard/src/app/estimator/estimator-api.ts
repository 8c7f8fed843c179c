import { HttpClient, HttpParams } from '@angular/common/http';
import { Injectable, inject } from '@angular/core';
import { Observable } from 'rxjs';
import type { AlertList, EstimatorDetail, EstimatorSeries } from '../../../../shared/src/api/api-types';

/** The estimator detail screen's calls. */
@Injectable({ providedIn: 'root' })
export class EstimatorApi {
  private readonly http = inject(HttpClient);

  detail(id: number): Observable<EstimatorDetail> {
    return this.http.get<EstimatorDetail>(`/api/estimators/${id}`);
  }

  series(id: number, from: Date, to: Date, points = 720): Observable<EstimatorSeries> {
    const params = new HttpParams().set('from', from.toISOString()).set('to', to.toISOString()).set('points', points);
    return this.http.get<EstimatorSeries>(`/api/estimators/${id}/series`, { params });
  }

  alerts(estimatorId: number, limit = 20): Observable<AlertList> {
    const params = new HttpParams()
      .set('estimatorId', estimatorId)
      .set('sort', 'openedAt')
      .set('order', 'desc')
      .set('limit', limit);
    return this.http.get<AlertList>('/api/alerts', { params });
  }
}

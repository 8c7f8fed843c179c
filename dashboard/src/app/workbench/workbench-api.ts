import { HttpClient, HttpParams } from '@angular/common/http';
import { Injectable, inject } from '@angular/core';
import { Observable } from 'rxjs';
import type {
  DesignSummary,
  EstimatorListItem,
  FleetResponse,
  Page,
  ResidualUpload,
  RetuneStudy,
  StudyListItem,
  StudyRequest,
} from '../../../../shared/src/api/api-types';

/** What POST /api/studies/:id/draft-revision answers. */
export interface DraftRevisionCreated {
  revisionId: number;
  revision: number;
}

/** The designer's workbench calls: designs, estimators to pick from, retune studies. */
@Injectable({ providedIn: 'root' })
export class WorkbenchApi {
  private readonly http = inject(HttpClient);

  designs(): Observable<{ items: DesignSummary[] }> {
    return this.http.get<{ items: DesignSummary[] }>('/api/designs');
  }

  /** Estimators whose unit or estimator key contains `q`. */
  searchEstimators(q: string, limit = 20): Observable<Page<EstimatorListItem>> {
    let params = new HttpParams().set('limit', limit).set('offset', 0);
    if (q.trim()) params = params.set('q', q.trim());
    return this.http.get<Page<EstimatorListItem>>('/api/estimators', { params });
  }

  /** One page of the fleet on one design (every revision), for gathering a cohort. */
  fleetOfDesign(designKey: string, offset: number, limit = 500): Observable<FleetResponse> {
    const params = new HttpParams()
      .set('design', designKey)
      .set('sort', 'unit')
      .set('order', 'asc')
      .set('limit', limit)
      .set('offset', offset);
    return this.http.get<FleetResponse>('/api/fleet', { params });
  }

  residualUploads(): Observable<ResidualUpload[]> {
    return this.http.get<ResidualUpload[]>('/api/residual-uploads');
  }

  studies(): Observable<StudyListItem[]> {
    return this.http.get<StudyListItem[]>('/api/studies');
  }

  study(id: number): Observable<RetuneStudy> {
    return this.http.get<RetuneStudy>(`/api/studies/${id}`);
  }

  runStudy(request: StudyRequest): Observable<RetuneStudy> {
    return this.http.post<RetuneStudy>('/api/studies', request);
  }

  createDraftRevision(studyId: number): Observable<DraftRevisionCreated> {
    return this.http.post<DraftRevisionCreated>(`/api/studies/${studyId}/draft-revision`, {});
  }
}

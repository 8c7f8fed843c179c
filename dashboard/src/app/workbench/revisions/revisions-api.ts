import { HttpClient } from '@angular/common/http';
import { Injectable, inject } from '@angular/core';
import { Observable } from 'rxjs';
import type { DesignSummary } from '../../../../../shared/src/api/api-types';
import type { DesignModel, DesignProblem } from '../../../../../shared/src/design/design-validation';

export type RevisionStatus = DesignSummary['revisions'][number]['status'];

/** What POST /api/designs/:id/revisions answers (201); the service's DesignRevisionCreated. */
export interface DesignRevisionCreated {
  id: number;
  designId: number;
  designKey: string;
  revision: number;
  status: 'draft';
  stateDim: number;
  measurementDim: number;
  warnings: string[];
  caution: string;
}

/** GET /api/designs/:id/revisions/:revisionId; the service's DesignRevisionDetail. */
export interface DesignRevisionDetail {
  id: number;
  designId: number;
  designKey: string;
  designName: string;
  revision: number;
  status: RevisionStatus;
  stateDim: number;
  measurementDim: number;
  model: DesignModel;
  notes: string;
  createdAt: string;
  estimators: number;
  check: { problems: DesignProblem[]; warnings: string[] };
  caution: string;
}

/** The design registry's calls: designs and their revisions, a revision's model, new designs and revisions, status changes. */
@Injectable({ providedIn: 'root' })
export class RevisionsApi {
  private readonly http = inject(HttpClient);

  designs(): Observable<{ items: DesignSummary[] }> {
    return this.http.get<{ items: DesignSummary[] }>('/api/designs');
  }

  createDesign(body: { key: string; name: string; description: string }): Observable<DesignSummary> {
    return this.http.post<DesignSummary>('/api/designs', body);
  }

  revision(designId: number, revisionId: number): Observable<DesignRevisionDetail> {
    return this.http.get<DesignRevisionDetail>(`/api/designs/${designId}/revisions/${revisionId}`);
  }

  createRevision(designId: number, body: { model: unknown; notes: string }): Observable<DesignRevisionCreated> {
    return this.http.post<DesignRevisionCreated>(`/api/designs/${designId}/revisions`, { ...body, status: 'draft' });
  }

  /** Administrators only. */
  changeStatus(designId: number, revisionId: number, status: 'released' | 'retired'): Observable<DesignRevisionDetail> {
    return this.http.patch<DesignRevisionDetail>(`/api/designs/${designId}/revisions/${revisionId}`, { status });
  }
}

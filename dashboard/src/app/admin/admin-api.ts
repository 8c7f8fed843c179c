import { HttpClient, HttpParams } from '@angular/common/http';
import { Injectable, inject } from '@angular/core';
import { Observable } from 'rxjs';
import type { Page, Role, Site, Unit, User } from '../../../../shared/src/api/api-types';

/** One row of GET /api/estimators (the registry view, without the live statistics). */
export interface EstimatorListItem {
  id: number;
  key: string;
  unitKey: string;
  siteKey: string;
  designKey: string;
  revision: number;
  measurementDim: number;
  expectedIntervalMs: number;
}

export interface NewUser {
  email: string;
  displayName: string;
  role: Role;
  password: string;
}

export interface UserChange {
  displayName?: string;
  role?: Role;
  active?: boolean;
}

/** A unit's device credentials, as issued: the secret appears in this answer only. */
export interface IssuedCredentials {
  username: string;
  secret: string;
  note?: string;
}

function paging(pageIndex: number, pageSize: number): HttpParams {
  return new HttpParams().set('limit', pageSize).set('offset', pageIndex * pageSize);
}

/** Administration calls: users, sites, units and their device credentials, estimators. */
@Injectable({ providedIn: 'root' })
export class AdminApi {
  private readonly http = inject(HttpClient);

  users(q: string, pageIndex: number, pageSize: number): Observable<Page<User>> {
    let params = paging(pageIndex, pageSize);
    if (q.trim()) params = params.set('q', q.trim());
    return this.http.get<Page<User>>('/api/users', { params });
  }

  createUser(user: NewUser): Observable<User> {
    return this.http.post<User>('/api/users', user);
  }

  updateUser(id: number, change: UserChange): Observable<User> {
    return this.http.patch<User>(`/api/users/${id}`, change);
  }

  sites(): Observable<{ items: Site[] }> {
    return this.http.get<{ items: Site[] }>('/api/sites');
  }

  units(site: string, pageIndex: number, pageSize: number): Observable<Page<Unit>> {
    let params = paging(pageIndex, pageSize);
    if (site) params = params.set('site', site);
    return this.http.get<Page<Unit>>('/api/units', { params });
  }

  issueCredentials(unitId: number): Observable<IssuedCredentials> {
    return this.http.post<IssuedCredentials>(`/api/units/${unitId}/credentials`, {});
  }

  revokeCredentials(unitId: number): Observable<{ revoked: number }> {
    return this.http.delete<{ revoked: number }>(`/api/units/${unitId}/credentials`);
  }

  estimators(unit: string, q: string, pageIndex: number, pageSize: number): Observable<Page<EstimatorListItem>> {
    let params = paging(pageIndex, pageSize);
    if (unit) params = params.set('unit', unit);
    if (q.trim()) params = params.set('q', q.trim());
    return this.http.get<Page<EstimatorListItem>>('/api/estimators', { params });
  }
}

import { HttpClient } from '@angular/common/http';
import { Injectable, inject } from '@angular/core';
import { Observable, map } from 'rxjs';
import type { RotaInput, RotaOverrideInput, RotaSummary, Site } from '../../../../shared/src/api/api-types';
import { AdminApi } from '../admin/admin-api';

/** Someone who can be put on the watch rota (an active user). */
export interface RotaPerson {
  userId: number;
  displayName: string;
  email: string;
  role: string;
}

/** The watch rota's calls; reading is open to every role, changing is for administrators. */
@Injectable({ providedIn: 'root' })
export class RotaApi {
  private readonly http = inject(HttpClient);
  private readonly admin = inject(AdminApi);

  rotas(): Observable<RotaSummary[]> {
    return this.http.get<RotaSummary[]>('/api/rotas');
  }

  create(input: RotaInput): Observable<RotaSummary> {
    return this.http.post<RotaSummary>('/api/rotas', input);
  }

  update(id: number, input: RotaInput): Observable<RotaSummary> {
    return this.http.patch<RotaSummary>(`/api/rotas/${id}`, input);
  }

  remove(id: number): Observable<void> {
    return this.http.delete<void>(`/api/rotas/${id}`);
  }

  addOverride(rotaId: number, input: RotaOverrideInput): Observable<RotaSummary> {
    return this.http.post<RotaSummary>(`/api/rotas/${rotaId}/overrides`, input);
  }

  removeOverride(rotaId: number, overrideId: number): Observable<RotaSummary> {
    return this.http.delete<RotaSummary>(`/api/rotas/${rotaId}/overrides/${overrideId}`);
  }

  /** Active users, by name, for the pickers (administrators only: the users list is theirs). */
  people(): Observable<RotaPerson[]> {
    return this.admin.users('', 0, 500).pipe(
      map((page) =>
        page.items
          .filter((u) => u.active !== false)
          .map((u) => ({ userId: u.id, displayName: u.displayName, email: u.email, role: u.role }))
          .sort((a, b) => a.displayName.localeCompare(b.displayName)),
      ),
    );
  }

  sites(): Observable<Site[]> {
    return this.admin.sites().pipe(map((r) => r.items));
  }
}

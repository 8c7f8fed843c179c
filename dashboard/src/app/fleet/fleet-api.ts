import { HttpClient, HttpParams } from '@angular/common/http';
import { Injectable, inject } from '@angular/core';
import { Observable } from 'rxjs';
import type { FleetHeatmap, FleetResponse, Site } from '../../../../shared/src/api/api-types';
import { fleetParams, type FleetQuery } from './fleet-query';

/** The fleet overview's calls. */
@Injectable({ providedIn: 'root' })
export class FleetApi {
  private readonly http = inject(HttpClient);

  fleet(query: FleetQuery): Observable<FleetResponse> {
    return this.http.get<FleetResponse>('/api/fleet', { params: fleetParams(query) });
  }

  heatmap(from: Date, to: Date, buckets: number): Observable<FleetHeatmap> {
    const params = new HttpParams().set('from', from.toISOString()).set('to', to.toISOString()).set('buckets', buckets);
    return this.http.get<FleetHeatmap>('/api/fleet/heatmap', { params });
  }

  sites(): Observable<{ items: Site[] }> {
    return this.http.get<{ items: Site[] }>('/api/sites');
  }
}

import { HttpClient, HttpParams } from '@angular/common/http';
import { Injectable, inject } from '@angular/core';
import { Observable } from 'rxjs';
import type {
  AcknowledgeLinkInfo,
  AcknowledgeLinkResult,
  AlertSeverity,
  Delivery,
  DeliveryList,
  DeliveryStatus,
  NotificationRule,
  WebhookEndpoint,
  WebhookEndpointWithSecret,
} from '../../../../shared/src/api/api-types';

export type RuleChange = Partial<Omit<NotificationRule, 'severity'>>;

export interface DeliveryQuery {
  channel: Delivery['channel'] | '';
  status: DeliveryStatus | '';
  pageIndex: number;
  pageSize: number;
}

/** The query string of GET /api/deliveries; empty filters are left out. */
export function deliveryParams(query: DeliveryQuery): HttpParams {
  let params = new HttpParams().set('limit', query.pageSize).set('offset', query.pageIndex * query.pageSize);
  if (query.channel) params = params.set('channel', query.channel);
  if (query.status) params = params.set('status', query.status);
  return params;
}

/** Notification rules, webhook endpoints, the delivery log, and the public acknowledge link. */
@Injectable({ providedIn: 'root' })
export class NotificationsApi {
  private readonly http = inject(HttpClient);

  rules(): Observable<NotificationRule[]> {
    return this.http.get<NotificationRule[]>('/api/notification-rules');
  }

  updateRule(severity: AlertSeverity, change: RuleChange): Observable<NotificationRule> {
    return this.http.patch<NotificationRule>(`/api/notification-rules/${severity}`, change);
  }

  webhooks(): Observable<WebhookEndpoint[]> {
    return this.http.get<WebhookEndpoint[]>('/api/webhooks');
  }

  registerWebhook(endpoint: { url: string; description: string }): Observable<WebhookEndpointWithSecret> {
    return this.http.post<WebhookEndpointWithSecret>('/api/webhooks', endpoint);
  }

  updateWebhook(id: number, change: { active?: boolean; description?: string }): Observable<WebhookEndpoint> {
    return this.http.patch<WebhookEndpoint>(`/api/webhooks/${id}`, change);
  }

  deleteWebhook(id: number): Observable<void> {
    return this.http.delete<void>(`/api/webhooks/${id}`);
  }

  deliveries(query: DeliveryQuery): Observable<DeliveryList> {
    return this.http.get<DeliveryList>('/api/deliveries', { params: deliveryParams(query) });
  }

  retryDelivery(id: number): Observable<Delivery> {
    return this.http.post<Delivery>(`/api/deliveries/${id}/retry`, {});
  }

  /** Public: what an e-mailed acknowledge link is for (no sign-in). */
  acknowledgeLink(token: string): Observable<AcknowledgeLinkInfo> {
    return this.http.get<AcknowledgeLinkInfo>(`/api/acknowledgements/${encodeURIComponent(token)}`);
  }

  /** Public: uses the link once. */
  acknowledgeByLink(token: string): Observable<AcknowledgeLinkResult> {
    return this.http.post<AcknowledgeLinkResult>(`/api/acknowledgements/${encodeURIComponent(token)}`, null);
  }
}

import type { Delivery, DeliveryStatus } from '../../../../shared/src/api/api-types';

export interface DeliveryLook {
  word: string;
  icon: string;
  colour: string;
}

/** Delivery outcomes as colour, icon shape and word together. */
export const DELIVERY_LOOK: Record<DeliveryStatus, DeliveryLook> = {
  sent: { word: 'Sent', icon: 'check_circle', colour: 'var(--wc-teal-500)' },
  pending: { word: 'Pending', icon: 'schedule', colour: 'var(--wc-ochre)' },
  failed: { word: 'Failed', icon: 'error', colour: 'var(--wc-magenta)' },
};

/** A pending delivery that has been tried already is waiting to be retried. */
export function deliveryLook(d: Pick<Delivery, 'status' | 'attempts'>): DeliveryLook {
  if (d.status === 'pending' && d.attempts > 0) return { ...DELIVERY_LOOK.pending, word: 'Retrying', icon: 'replay' };
  return DELIVERY_LOOK[d.status];
}

export const CHANNEL_WORDS: Record<Delivery['channel'], { word: string; icon: string }> = {
  email: { word: 'E-mail', icon: 'mail' },
  webhook: { word: 'Webhook', icon: 'webhook' },
};

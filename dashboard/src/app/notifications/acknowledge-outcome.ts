import { HttpErrorResponse } from '@angular/common/http';
import type { AcknowledgeLinkInfo, AlertState } from '../../../../shared/src/api/api-types';
import { problemKind } from '../feedback/problem-issues';
import { problemMessage } from '../feedback/problem-message';

/** Why an acknowledge link cannot be used. */
export type LinkRefusal = 'used' | 'expired' | 'not-open' | 'invalid';

/** The refusal behind a failed call to the link, or null when the failure is something else (network, server). */
export function linkRefusalOf(err: unknown): LinkRefusal | null {
  const kind = problemKind(err);
  if (kind?.endsWith('link-used')) return 'used';
  if (kind?.endsWith('link-expired')) return 'expired';
  if (kind?.endsWith('alert-state')) return 'not-open';
  if (kind?.endsWith('link-invalid')) return 'invalid';
  if (err instanceof HttpErrorResponse) {
    if (err.status === 410) return 'expired';
    if (err.status === 404 || err.status === 400) return 'invalid';
  }
  return null;
}

export function linkRefusalOfInfo(info: AcknowledgeLinkInfo): LinkRefusal | null {
  if (info.usable) return null;
  return info.reason ?? 'not-open';
}

/** A refusal in plain words: a heading and what to do. */
export function refusalWords(refusal: LinkRefusal, context: { expiresAt?: string; state?: AlertState; formatTime?: (iso: string) => string } = {}): { title: string; text: string; icon: string } {
  const time = context.formatTime ?? ((iso: string) => new Date(iso).toLocaleString());
  switch (refusal) {
    case 'used':
      return {
        title: 'This link has already been used',
        text: 'Each acknowledge link works once, and this one has acknowledged its alert already. Nothing more is needed from this e-mail.',
        icon: 'task_alt',
      };
    case 'expired':
      return {
        title: 'This link has expired',
        text: `${context.expiresAt ? `It was valid until ${time(context.expiresAt)}. ` : ''}Sign in to Whitecap to acknowledge the alert from the alert list.`,
        icon: 'timer_off',
      };
    case 'not-open':
      return {
        title: 'This alert is no longer open',
        text:
          context.state === 'acknowledged'
            ? 'Someone has acknowledged it already, so there is nothing to acknowledge.'
            : context.state === 'resolved'
              ? 'It has been resolved already, so there is nothing to acknowledge.'
              : 'It has been acknowledged or resolved already, so there is nothing to acknowledge.',
        icon: 'published_with_changes',
      };
    case 'invalid':
      return {
        title: 'This link is not valid',
        text: 'Whitecap does not recognise it. It may have been cut short or changed by the mail program. Open the whole link from the e-mail again, or sign in to Whitecap to find the alert.',
        icon: 'link_off',
      };
  }
}

/** A failed call that is not a refusal, in words. */
export function linkFailureWords(err: unknown): string {
  return problemMessage(err, 'Try again in a moment.');
}

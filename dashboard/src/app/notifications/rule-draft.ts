import type { NotificationRule } from '../../../../shared/src/api/api-types';
import type { RuleChange } from './notifications-api';

/** A notification rule as its row's inputs hold it. */
export interface RuleDraft {
  pages: boolean;
  /** As typed. */
  handoffAfterMinutes: string;
  /** 'HH:MM' or '' for none. */
  quietFrom: string;
  quietTo: string;
}

/** The handoff delays the service accepts: 5 seconds (for drills) to a day. */
export const MIN_HANDOFF_MINUTES = 1 / 12;
export const MAX_HANDOFF_MINUTES = 1440;
const HHMM = /^([01]\d|2[0-3]):[0-5]\d$/;

export function ruleDraft(rule: NotificationRule): RuleDraft {
  return {
    pages: rule.pages,
    handoffAfterMinutes: String(rule.handoffAfterMinutes),
    quietFrom: rule.quietFrom ?? '',
    quietTo: rule.quietTo ?? '',
  };
}

/**
 * What to send to change `rule` into `draft` (only the fields that differ), or what is
 * wrong with the draft. Quiet hours are both set or both empty, and may run past midnight.
 */
export function ruleChange(rule: NotificationRule, draft: RuleDraft): { change: RuleChange; problems: string[] } {
  const problems: string[] = [];
  const minutesText = draft.handoffAfterMinutes.trim();
  const minutes = Number(minutesText);
  if (!/^\d+(\.\d+)?$/.test(minutesText) || minutes < MIN_HANDOFF_MINUTES - 1e-9 || minutes > MAX_HANDOFF_MINUTES) {
    problems.push(`Hand off after a number of minutes from 0.1 (about 5 seconds, for drills) to ${MAX_HANDOFF_MINUTES} (a day).`);
  }
  const from = draft.quietFrom.trim();
  const to = draft.quietTo.trim();
  if ((from === '') !== (to === '')) problems.push('Give quiet hours both a start and an end, or leave both empty for none.');
  else if (from && (!HHMM.test(from) || !HHMM.test(to))) problems.push('Enter quiet hours as HH:MM, 24-hour.');
  else if (from && from === to) problems.push('Quiet hours start and end at the same time; leave both empty for none.');
  if (problems.length) return { change: {}, problems };
  const change: RuleChange = {};
  if (draft.pages !== rule.pages) change.pages = draft.pages;
  if (minutes !== rule.handoffAfterMinutes) change.handoffAfterMinutes = minutes;
  if ((from || null) !== rule.quietFrom || (to || null) !== rule.quietTo) {
    change.quietFrom = from || null;
    change.quietTo = to || null;
  }
  return { change, problems };
}

/** "22:00 to 07:00 (past midnight)" or "none". */
export function quietHoursWords(rule: Pick<NotificationRule, 'quietFrom' | 'quietTo'>): string {
  if (!rule.quietFrom || !rule.quietTo) return 'none';
  return `${rule.quietFrom} to ${rule.quietTo}${rule.quietTo < rule.quietFrom ? ' (past midnight)' : ''}`;
}

/** "10 min", "1 h 30 min", "30 s" (short delays are for drills). */
export function handoffWords(minutes: number): string {
  if (minutes < 1) return `${Math.round(minutes * 60)} s`;
  if (minutes < 60 || minutes % 1 !== 0) return `${Number(minutes.toFixed(2))} min`;
  const h = Math.floor(minutes / 60);
  return minutes % 60 ? `${h} h ${minutes % 60} min` : `${h} h`;
}

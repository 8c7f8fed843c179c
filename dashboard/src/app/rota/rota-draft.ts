import type { RotaInput, RotaOverrideInput, RotaSummary } from '../../../../shared/src/api/api-types';
import type { ProblemIssue } from '../feedback/problem-issues';
import { isTimeZone, zonedLocalToInstant } from './zoned-time';

/** ISO weekdays, Monday = 1 … Sunday = 7. */
export const WEEKDAYS: { value: number; word: string }[] = [
  { value: 1, word: 'Monday' },
  { value: 2, word: 'Tuesday' },
  { value: 3, word: 'Wednesday' },
  { value: 4, word: 'Thursday' },
  { value: 5, word: 'Friday' },
  { value: 6, word: 'Saturday' },
  { value: 7, word: 'Sunday' },
];

export function weekdayWord(weekday: number): string {
  return WEEKDAYS.find((d) => d.value === weekday)?.word ?? `day ${weekday}`;
}

/** 'HH:MM', 00:00 to 23:59. */
const HANDOVER = /^([01]\d|2[0-3]):[0-5]\d$/;

export interface ShiftRow {
  weekday: number;
  handover: string;
  userId: number | null;
}

/** A rota as its form holds it. */
export interface RotaDraft {
  name: string;
  /** Null: the whole fleet. */
  siteId: number | null;
  timeZone: string;
  shifts: ShiftRow[];
  /** Next in line, in order. */
  backups: number[];
}

export function emptyDraft(timeZone: string): RotaDraft {
  return { name: '', siteId: null, timeZone, shifts: [{ weekday: 1, handover: '08:00', userId: null }], backups: [] };
}

export function draftFromRota(rota: RotaSummary): RotaDraft {
  return {
    name: rota.name,
    siteId: rota.scope.kind === 'site' ? rota.scope.siteId : null,
    timeZone: rota.timeZone,
    shifts: sortShifts(rota.shifts.map((s) => ({ weekday: s.weekday, handover: s.handover, userId: s.userId }))),
    backups: rota.backups.map((b) => b.userId),
  };
}

/** Shifts in the order of the week: by weekday, then handover time. */
export function sortShifts<T extends { weekday: number; handover: string }>(shifts: T[]): T[] {
  return [...shifts].sort((a, b) => a.weekday - b.weekday || a.handover.localeCompare(b.handover));
}

/**
 * What is wrong with a draft before it is sent, each with the path the service would use
 * (so the form shows both kinds of problem the same way). Empty when it can be sent.
 */
export function rotaDraftIssues(draft: RotaDraft): ProblemIssue[] {
  const issues: ProblemIssue[] = [];
  if (!draft.name.trim()) issues.push({ path: 'name', message: 'Give the rota a name people will recognise.' });
  if (!isTimeZone(draft.timeZone)) issues.push({ path: 'timeZone', message: 'Pick a time zone from the list.' });
  if (draft.shifts.length === 0) issues.push({ path: 'shifts', message: 'Add at least one weekly shift.' });
  const seen = new Map<string, number>();
  draft.shifts.forEach((s, i) => {
    if (!WEEKDAYS.some((d) => d.value === s.weekday)) issues.push({ path: `shifts.${i}.weekday`, message: 'Pick a weekday.' });
    if (!HANDOVER.test(s.handover)) {
      issues.push({ path: `shifts.${i}.handover`, message: 'Enter the handover time as HH:MM, 24-hour.' });
    } else {
      const key = `${s.weekday} ${s.handover}`;
      const first = seen.get(key);
      if (first !== undefined) {
        issues.push({ path: `shifts.${i}.handover`, message: `Same weekday and handover time as shift ${first + 1}.` });
      } else {
        seen.set(key, i);
      }
    }
    if (s.userId === null) issues.push({ path: `shifts.${i}.userId`, message: 'Pick who is on watch.' });
  });
  const backups = new Set<number>();
  draft.backups.forEach((b, i) => {
    if (backups.has(b)) issues.push({ path: `backups.${i}`, message: 'This person is already a backup.' });
    backups.add(b);
  });
  return issues;
}

/**
 * The request body for a valid draft (check `rotaDraftIssues` first). Shifts keep the
 * draft's order, so the service's problem paths ('shifts.2…') point at the form's rows.
 */
export function toRotaInput(draft: RotaDraft): RotaInput {
  return {
    name: draft.name.trim(),
    siteId: draft.siteId,
    timeZone: draft.timeZone,
    shifts: draft.shifts.map((s) => ({ weekday: s.weekday, handover: s.handover, userId: s.userId as number })),
    backups: [...draft.backups],
  };
}

/** An override as its form holds it: datetime-local values read in the rota's time zone. */
export interface OverrideDraft {
  from: string;
  to: string;
  userId: number | null;
  note: string;
}

/** The request body for an override, or what is wrong with it. */
export function overrideInput(draft: OverrideDraft, timeZone: string): { input: RotaOverrideInput; issues: [] } | { input: null; issues: ProblemIssue[] } {
  const issues: ProblemIssue[] = [];
  const from = zonedLocalToInstant(draft.from, timeZone);
  const to = zonedLocalToInstant(draft.to, timeZone);
  if (!from) issues.push({ path: 'from', message: 'Enter when the override starts.' });
  if (!to) issues.push({ path: 'to', message: 'Enter when the override ends.' });
  if (from && to && Date.parse(to) <= Date.parse(from)) issues.push({ path: 'to', message: 'The end must be after the start.' });
  if (draft.userId === null) issues.push({ path: 'userId', message: 'Pick who is on watch instead.' });
  if (issues.length || !from || !to || draft.userId === null) return { input: null, issues };
  const note = draft.note.trim();
  return { input: { from, to, userId: draft.userId, ...(note ? { note } : {}) }, issues: [] };
}

const FIELD_WORDS: Record<string, string> = {
  name: 'Name',
  siteId: 'Scope',
  timeZone: 'Time zone',
  shifts: 'Weekly shifts',
  weekday: 'weekday',
  handover: 'handover time',
  userId: 'person',
  backups: 'Backups',
  from: 'From',
  to: 'To',
  note: 'Note',
};

/** 'shifts.2.handover' → 'Shift 3, handover time'; 'backups.0' → 'Backup 1'; '' → 'Rota'. */
export function issueLabel(path: string): string {
  const parts = path.split('.').filter(Boolean);
  if (parts.length === 0) return 'Rota';
  const [head, index, ...rest] = parts;
  if (index !== undefined && /^\d+$/.test(index)) {
    const n = Number(index) + 1;
    const what = head === 'shifts' ? `Shift ${n}` : head === 'backups' ? `Backup ${n}` : `${FIELD_WORDS[head] ?? head} ${n}`;
    return rest.length ? `${what}, ${rest.map((r) => FIELD_WORDS[r] ?? r).join(' ')}` : what;
  }
  return parts.map((p) => FIELD_WORDS[p] ?? p).join(', ');
}

/** The problems that concern one place of the form (for marking a shift row, say). */
export function issuesAt(issues: ProblemIssue[], prefix: string): ProblemIssue[] {
  return issues.filter((i) => i.path === prefix || i.path.startsWith(`${prefix}.`));
}

import { HttpErrorResponse } from '@angular/common/http';
import type { RotaSummary } from '../../../../shared/src/api/api-types';
import { problemIssues, problemKind } from '../feedback/problem-issues';
import { draftFromRota, emptyDraft, issueLabel, issuesAt, overrideInput, rotaDraftIssues, toRotaInput, type RotaDraft } from './rota-draft';

const rota: RotaSummary = {
  id: 3,
  name: 'North Yard nights',
  scope: { kind: 'site', siteId: 1, siteName: 'North Yard' },
  timeZone: 'Europe/Amsterdam',
  shifts: [
    { weekday: 3, handover: '18:00', userId: 2, displayName: 'Ravi' },
    { weekday: 1, handover: '18:00', userId: 4, displayName: 'Ade' },
    { weekday: 1, handover: '06:00', userId: 2, displayName: 'Ravi' },
  ],
  backups: [{ userId: 4, displayName: 'Ade' }],
  overrides: [],
  onWatch: null,
  next: [],
  handoffChain: [],
};

describe('the rota draft', () => {
  it('takes a rota into the form with its shifts in the order of the week', () => {
    expect(draftFromRota(rota)).toEqual({
      name: 'North Yard nights',
      siteId: 1,
      timeZone: 'Europe/Amsterdam',
      shifts: [
        { weekday: 1, handover: '06:00', userId: 2 },
        { weekday: 1, handover: '18:00', userId: 4 },
        { weekday: 3, handover: '18:00', userId: 2 },
      ],
      backups: [4],
    });
  });

  it('builds the request body with a trimmed name, the fleet as a null site, shifts in the form order', () => {
    const draft: RotaDraft = {
      name: '  Fleet watch ',
      siteId: null,
      timeZone: 'Europe/London',
      shifts: [
        { weekday: 7, handover: '08:00', userId: 5 },
        { weekday: 2, handover: '08:00', userId: 6 },
      ],
      backups: [6, 5],
    };
    expect(rotaDraftIssues(draft)).toEqual([]);
    expect(toRotaInput(draft)).toEqual({
      name: 'Fleet watch',
      siteId: null,
      timeZone: 'Europe/London',
      shifts: [
        { weekday: 7, handover: '08:00', userId: 5 },
        { weekday: 2, handover: '08:00', userId: 6 },
      ],
      backups: [6, 5],
    });
  });

  it('names every problem at the path the service would use', () => {
    const draft: RotaDraft = {
      name: ' ',
      siteId: null,
      timeZone: 'Somewhere/Else',
      shifts: [
        { weekday: 1, handover: '08:00', userId: 2 },
        { weekday: 1, handover: '08:00', userId: null },
        { weekday: 2, handover: '8:00', userId: 2 },
        { weekday: 9, handover: '24:00', userId: 2 },
      ],
      backups: [3, 3],
    };
    expect(rotaDraftIssues(draft).map((i) => i.path)).toEqual([
      'name',
      'timeZone',
      'shifts.1.handover',
      'shifts.1.userId',
      'shifts.2.handover',
      'shifts.3.weekday',
      'shifts.3.handover',
      'backups.1',
    ]);
    expect(rotaDraftIssues(draft)[2].message).toBe('Same weekday and handover time as shift 1.');
    expect(rotaDraftIssues({ ...emptyDraft('UTC'), name: 'x', shifts: [] })).toEqual([{ path: 'shifts', message: 'Add at least one weekly shift.' }]);
  });

  it('labels problem paths in words and picks those of one row', () => {
    expect(issueLabel('shifts.2.handover')).toBe('Shift 3, handover time');
    expect(issueLabel('backups.0')).toBe('Backup 1');
    expect(issueLabel('timeZone')).toBe('Time zone');
    expect(issueLabel('')).toBe('Rota');
    const issues = [
      { path: 'shifts.1.userId', message: 'a' },
      { path: 'shifts.10.handover', message: 'b' },
      { path: 'name', message: 'c' },
    ];
    expect(issuesAt(issues, 'shifts.1')).toEqual([issues[0]]);
  });
});

describe('the override draft', () => {
  it('reads the times in the rota zone, not the viewer zone', () => {
    const result = overrideInput({ from: '2026-07-01T18:00', to: '2026-07-02T06:00', userId: 4, note: ' swap with Ravi ' }, 'Europe/London');
    expect(result).toEqual({
      input: { from: '2026-07-01T17:00:00.000Z', to: '2026-07-02T05:00:00.000Z', userId: 4, note: 'swap with Ravi' },
      issues: [],
    });
  });

  it('leaves out an empty note and refuses an end before the start or a missing person', () => {
    expect(overrideInput({ from: '2026-01-01T08:00', to: '2026-01-01T09:00', userId: 4, note: '' }, 'UTC').input).toEqual({
      from: '2026-01-01T08:00:00.000Z',
      to: '2026-01-01T09:00:00.000Z',
      userId: 4,
    });
    const bad = overrideInput({ from: '2026-01-01T09:00', to: '2026-01-01T09:00', userId: null, note: '' }, 'UTC');
    expect(bad.input).toBeNull();
    expect(bad.issues.map((i) => i.path)).toEqual(['to', 'userId']);
    expect(overrideInput({ from: '', to: '', userId: 1, note: '' }, 'UTC').issues.map((i) => i.path)).toEqual(['from', 'to']);
  });
});

describe('problems from the service', () => {
  it('reads the field problems and the kind from a problem+json answer', () => {
    const err = new HttpErrorResponse({
      status: 400,
      error: {
        type: 'https://whitecap.invalid/problems/invalid-request',
        title: 'Invalid request',
        detail: 'body shifts.0.handover: bad time',
        errors: [{ where: 'body', path: 'shifts.0.handover', message: 'bad time' }, { message: 'whole body' }],
      },
    });
    expect(problemIssues(err)).toEqual([
      { path: 'shifts.0.handover', message: 'bad time' },
      { path: '', message: 'whole body' },
    ]);
    expect(problemKind(err)).toBe('invalid-request');
    expect(problemIssues(new Error('x'))).toEqual([]);
    expect(problemKind(new HttpErrorResponse({ status: 0 }))).toBeNull();
  });
});

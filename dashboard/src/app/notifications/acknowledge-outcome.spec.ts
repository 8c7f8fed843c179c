import { HttpErrorResponse } from '@angular/common/http';
import { deliveryLook } from './delivery-look';
import { linkRefusalOf, linkRefusalOfInfo, refusalWords } from './acknowledge-outcome';

const problem = (status: number, kind: string) =>
  new HttpErrorResponse({ status, error: { type: `https://whitecap.invalid/problems/${kind}`, title: 't', status } });

describe('acknowledge link refusals', () => {
  it('reads the refusal from the problem type', () => {
    expect(linkRefusalOf(problem(409, 'link-used'))).toBe('used');
    expect(linkRefusalOf(problem(409, 'alert-state'))).toBe('not-open');
    expect(linkRefusalOf(problem(410, 'link-expired'))).toBe('expired');
    expect(linkRefusalOf(problem(404, 'link-invalid'))).toBe('invalid');
    expect(linkRefusalOf(problem(400, 'link-invalid'))).toBe('invalid');
  });

  it('falls back on the status, and leaves network and server failures alone', () => {
    expect(linkRefusalOf(new HttpErrorResponse({ status: 404 }))).toBe('invalid');
    expect(linkRefusalOf(new HttpErrorResponse({ status: 410 }))).toBe('expired');
    expect(linkRefusalOf(new HttpErrorResponse({ status: 0 }))).toBeNull();
    expect(linkRefusalOf(new HttpErrorResponse({ status: 503 }))).toBeNull();
  });

  it('reads the refusal from the link info', () => {
    const info = {
      alert: { id: 1, rule: 'silence', severity: 'warning' as const, summary: '', unitKey: null, estimatorKey: null, openedAt: '', state: 'open' as const },
      recipient: 'r@example.org',
      expiresAt: '2026-03-01T10:00:00Z',
    };
    expect(linkRefusalOfInfo({ ...info, usable: true, reason: null })).toBeNull();
    expect(linkRefusalOfInfo({ ...info, usable: false, reason: 'expired' })).toBe('expired');
    expect(linkRefusalOfInfo({ ...info, usable: false, reason: null })).toBe('not-open');
  });

  it('says each refusal in plain words', () => {
    expect(refusalWords('used').title).toBe('This link has already been used');
    expect(refusalWords('expired', { expiresAt: '2026-03-01T10:00:00Z', formatTime: () => '1 Mar 2026, 10:00' }).text).toMatch(/^It was valid until 1 Mar 2026, 10:00\. Sign in/);
    expect(refusalWords('not-open', { state: 'resolved' }).text).toMatch(/resolved already/);
    expect(refusalWords('invalid').title).toBe('This link is not valid');
  });
});

describe('delivery outcomes', () => {
  it('shows a pending delivery that was tried already as retrying', () => {
    expect(deliveryLook({ status: 'pending', attempts: 0 }).word).toBe('Pending');
    expect(deliveryLook({ status: 'pending', attempts: 2 }).word).toBe('Retrying');
    expect(deliveryLook({ status: 'failed', attempts: 5 })).toEqual({ word: 'Failed', icon: 'error', colour: 'var(--wc-magenta)' });
  });
});

import type { NotificationRule } from '../../../../shared/src/api/api-types';
import { handoffWords, quietHoursWords, ruleChange, ruleDraft } from './rule-draft';

const warning: NotificationRule = { severity: 'warning', pages: true, handoffAfterMinutes: 10, quietFrom: null, quietTo: null };

describe('editing a notification rule', () => {
  it('sends nothing when nothing changed', () => {
    expect(ruleChange(warning, ruleDraft(warning))).toEqual({ change: {}, problems: [] });
  });

  it('sends only the fields that changed, quiet hours as a pair', () => {
    expect(ruleChange(warning, { pages: false, handoffAfterMinutes: ' 15 ', quietFrom: '22:00', quietTo: '07:00' })).toEqual({
      change: { pages: false, handoffAfterMinutes: 15, quietFrom: '22:00', quietTo: '07:00' },
      problems: [],
    });
    const quiet = { ...warning, quietFrom: '22:00', quietTo: '07:00' };
    expect(ruleChange(quiet, { ...ruleDraft(quiet), quietFrom: '', quietTo: '' }).change).toEqual({ quietFrom: null, quietTo: null });
  });

  it('refuses minutes that are not a number from 5 seconds to a day, and takes fractions for drills', () => {
    for (const typed of ['0', '-5', '0.05', 'ten', '', '1441', '1e3']) {
      expect(ruleChange(warning, { ...ruleDraft(warning), handoffAfterMinutes: typed }).problems).toEqual([
        'Hand off after a number of minutes from 0.1 (about 5 seconds, for drills) to 1440 (a day).',
      ]);
    }
    expect(ruleChange(warning, { ...ruleDraft(warning), handoffAfterMinutes: '0.5' }).change).toEqual({ handoffAfterMinutes: 0.5 });
  });

  it('says handoff delays in words', () => {
    expect(handoffWords(10)).toBe('10 min');
    expect(handoffWords(0.5)).toBe('30 s');
    expect(handoffWords(90)).toBe('1 h 30 min');
    expect(handoffWords(120)).toBe('2 h');
    expect(handoffWords(2.5)).toBe('2.5 min');
  });

  it('refuses half-set, malformed or empty quiet hours', () => {
    const draft = ruleDraft(warning);
    expect(ruleChange(warning, { ...draft, quietFrom: '22:00' }).problems[0]).toMatch(/both a start and an end/);
    expect(ruleChange(warning, { ...draft, quietFrom: '25:00', quietTo: '07:00' }).problems[0]).toMatch(/HH:MM/);
    expect(ruleChange(warning, { ...draft, quietFrom: '07:00', quietTo: '07:00' }).problems[0]).toMatch(/same time/);
  });

  it('says quiet hours in words, noting when they run past midnight', () => {
    expect(quietHoursWords({ quietFrom: null, quietTo: null })).toBe('none');
    expect(quietHoursWords({ quietFrom: '22:00', quietTo: '07:00' })).toBe('22:00 to 07:00 (past midnight)');
    expect(quietHoursWords({ quietFrom: '12:00', quietTo: '14:00' })).toBe('12:00 to 14:00');
  });
});

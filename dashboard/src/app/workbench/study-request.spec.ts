import type { DesignSummary } from '../../../../shared/src/api/api-types';
import { cohortGroups, cohortLabel } from './cohorts';
import type { PickedEstimator } from './estimator-picker';
import { studyRequest, type StudyDraft } from './study-request';

const now = Date.parse('2026-03-02T12:00:00Z');
const draft = (over: Partial<StudyDraft> = {}): StudyDraft => ({
  source: 'cohort',
  revisionId: 12,
  picked: [],
  window: { kind: 'last', ms: 24 * 3_600_000 },
  lags: '15',
  estimateQ: 'diagonal',
  estimateR: 'full',
  title: '',
  ...over,
});
const tractor = (id: number, revision = 2): PickedEstimator => ({ id, unitKey: `tractor-${id}`, key: 'position', designKey: 'tractor-position', revision });

describe('the study form’s request', () => {
  it('asks for a cohort over the last 24 h', () => {
    expect(studyRequest(draft(), now)).toEqual({
      ok: true,
      request: {
        designRevisionId: 12,
        from: '2026-03-01T12:00:00.000Z',
        to: '2026-03-02T12:00:00.000Z',
        lags: 15,
        estimateQ: 'diagonal',
        estimateR: 'full',
      },
    });
  });

  it('asks for chosen estimators with a title and custom ends', () => {
    const from = new Date('2026-03-01T06:00:00Z');
    const to = new Date('2026-03-01T18:00:00Z');
    const check = studyRequest(draft({ source: 'estimators', picked: [tractor(33), tractor(34)], window: { kind: 'custom', from, to }, lags: '', title: '  Night shift  ' }), now);
    expect(check).toEqual({
      ok: true,
      request: { estimatorIds: [33, 34], from: from.toISOString(), to: to.toISOString(), lags: 15, estimateQ: 'diagonal', estimateR: 'full', title: 'Night shift' },
    });
  });

  it('says what to change instead of sending a request it cannot use', () => {
    const check = studyRequest(draft({ source: 'estimators', picked: [tractor(1, 1), tractor(33, 2)], window: null, lags: '2.5' }), now);
    expect(check.ok).toBe(false);
    expect(!check.ok && check.problems).toEqual([
      'The chosen estimators run tractor-position rev 1, tractor-position rev 2; a study covers one design revision, so keep the estimators of one.',
      'Fix the custom window, or pick a preset.',
      'Lags must be a whole number from 2 to 60.',
    ]);
    expect(studyRequest(draft({ revisionId: null }), now)).toEqual({ ok: false, problems: ['Choose the design revision whose estimators to study.'] });
    expect(studyRequest(draft({ source: 'estimators' }), now)).toEqual({ ok: false, problems: ['Choose at least one estimator.'] });
  });
});

describe('cohorts', () => {
  const designs: DesignSummary[] = [
    {
      id: 1,
      key: 'tractor-position',
      name: 'Tractor planar position/velocity',
      description: '',
      revisions: [
        { id: 11, revision: 1, status: 'released', stateDim: 4, measurementDim: 2, estimators: 32, createdAt: '2026-01-01T00:00:00Z' },
        { id: 12, revision: 2, status: 'released', stateDim: 4, measurementDim: 2, estimators: 8, createdAt: '2026-02-01T00:00:00Z' },
      ],
    },
  ];

  it('offers each design’s revisions newest first, saying how many estimators run each', () => {
    const groups = cohortGroups(designs);
    expect(groups.map((g) => g.options.map((o) => o.revisionId))).toEqual([[12, 11]]);
    expect(cohortLabel(groups[0].options[0])).toBe('tractor-position rev 2 · released · 8 estimators');
    expect(cohortLabel({ ...groups[0].options[0], estimators: 1 })).toBe('tractor-position rev 2 · released · 1 estimator');
  });
});

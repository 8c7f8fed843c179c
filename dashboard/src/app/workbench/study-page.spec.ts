import { provideHttpClient } from '@angular/common/http';
import { HttpTestingController, provideHttpClientTesting } from '@angular/common/http/testing';
import { provideZonelessChangeDetection } from '@angular/core';
import { TestBed, type ComponentFixture } from '@angular/core/testing';
import { provideRouter } from '@angular/router';
import { provideEchartsCore } from 'ngx-echarts';
import type { RetuneStudy, StudyMargins } from '../../../../shared/src/api/api-types';
import { PrintCharts } from './print-charts';
import { StudyPage } from './study-page';

const CAUTION =
  'Advisory: these results must be validated in simulation and under your organisation’s own safety process before any machine runs them; applicable codes and licensed engineering practice prevail.';

const margins = (over: Partial<StudyMargins> = {}): StudyMargins => ({
  closedLoopStable: true,
  gainMarginUpperDb: 9.1,
  gainMarginLowerDb: null,
  phaseMarginDeg: 48.2,
  diskAlpha: 0.72,
  sweep: { omega: [0.01, 0.1, 1], magnitudeDb: [20, 5, -10], phaseDeg: [-100, -130, -170] },
  ...over,
});

function study(over: Partial<RetuneStudy> = {}): RetuneStudy {
  return {
    id: 5,
    title: 'Revision 2 tractors, last day',
    createdAt: '2026-03-02T12:00:00Z',
    createdBy: 'Dana Whitlow (estimator design)',
    request: { designRevisionId: 12, from: '2026-03-01T12:00:00Z', to: '2026-03-02T12:00:00Z', lags: 15, estimateQ: 'diagonal', estimateR: 'diagonal' },
    design: { designId: 1, designKey: 'tractor-position', revisionId: 12, revision: 2, stateDim: 2, measurementDim: 1 },
    estimators: [
      { id: 33, unitKey: 'tractor-33', key: 'position', samples: 2000 },
      { id: 34, unitKey: 'tractor-34', key: 'position', samples: 2000 },
    ],
    samples: 4000,
    assumed: { Q: [[0.0005, 0], [0, 0.0005]], R: [[1]] },
    estimated: {
      Q: [[0.049, 0], [0, 0.051]],
      R: [[0.98]],
      intervals: { Q: [[[0.04, 0.06], [0, 0]], [[0, 0], [0.043, 0.06]]], R: [[[0.9, 1.05]]] },
      identifiable: { Q: false, R: true, reason: 'only the sum of the two diagonal entries is seen at these lags' },
      rank: 2,
      unknowns: 3,
      condition: 1.2e6,
    },
    nis: { observed: 8.3, predictedCurrent: 8.1, predictedProposed: 1, m: 1 },
    current: { L: [[0.2], [0.01]], S: [[1.1]], poles: [{ re: 0.95, im: 0.02 }, { re: 0.95, im: -0.02 }] },
    proposed: { L: [[0.7], [0.2]], S: [[3.2]], poles: [{ re: 0.6, im: 0.1 }, { re: 0.6, im: -0.1 }] },
    loop: {
      K: [[1.2, 0.8]],
      separation: { agree: true, largestMismatch: 3e-13, combinedPoles: [{ re: 0.6, im: 0.1 }] },
      marginsCurrent: margins(),
      marginsProposed: margins({ gainMarginUpperDb: 4.2, phaseMarginDeg: null }),
      warnings: ['The proposed gain lowers the upward gain margin from 9.1 dB to 4.2 dB, below the 6 dB floor.'],
    },
    autocovariance: { lags: [0, 1, 2], estimated: [8, 5, 3], fitted: [8.1, 4.9, 3.1] },
    notes: ['Estimators without samples in the window were left out: 6.'],
    caution: CAUTION,
    draftRevisionId: null,
    ...over,
  };
}

describe('StudyPage', () => {
  let fixture: ComponentFixture<StudyPage>;
  let http: HttpTestingController;
  const text = () => (fixture.nativeElement.textContent as string).replace(/\s+/g, ' ');
  /** A margin row's cells as "value|mark word". */
  const cells = (kind: string): string[] =>
    [...fixture.nativeElement.querySelectorAll(`tr[data-margin=${kind}] td`)].map((td: Element) =>
      [td.querySelector('.value')?.textContent?.trim(), td.querySelector('wc-signal-mark')?.textContent?.trim()].filter(Boolean).join('|') || (td.textContent ?? '').trim(),
    );
  const settle = async () => {
    await new Promise((r) => setTimeout(r, 0));
    await fixture.whenStable();
  };

  beforeAll(() => {
    // jsdom has no ResizeObserver; the charts never load here (ECharts needs a canvas).
    (window as unknown as { ResizeObserver: unknown }).ResizeObserver ??= class {
      observe(): void {}
      unobserve(): void {}
      disconnect(): void {}
    };
  });

  async function open(s: RetuneStudy): Promise<void> {
    TestBed.configureTestingModule({ providers: [provideZonelessChangeDetection(), provideHttpClient(), provideHttpClientTesting(), provideRouter([])] });
    TestBed.overrideComponent(StudyPage, {
      set: { providers: [provideEchartsCore({ echarts: () => new Promise(() => undefined) }), PrintCharts] },
    });
    http = TestBed.inject(HttpTestingController);
    fixture = TestBed.createComponent(StudyPage);
    fixture.componentRef.setInput('id', String(s.id));
    await fixture.whenStable();
    http.expectOne(`/api/studies/${s.id}`).flush(s);
    await settle();
  }

  afterEach(() => http.verify());

  it('puts the caution in a prominent note above the results', async () => {
    await open(study());
    const note = fixture.nativeElement.querySelector('wc-caution-banner[role=note]') as HTMLElement;
    expect(note.getAttribute('aria-label')).toBe('Caution');
    expect(note.textContent).toContain(CAUTION);
    const order = [...fixture.nativeElement.querySelectorAll('wc-caution-banner, section')].map((e: Element) => e.tagName.toLowerCase());
    expect(order[0]).toBe('wc-caution-banner');
  });

  it('shows the header, the estimated Q with its intervals, and says plainly that the data do not determine Q', async () => {
    await open(study());
    expect(text()).toContain('tractor-position rev 2');
    expect(text()).toContain('4,000 from 2 estimators');
    const q = fixture.nativeElement.querySelector('table[aria-label="Estimated Q"]') as HTMLElement;
    expect(q.textContent).toContain('0.049');
    expect(q.textContent).toContain('0.04 to 0.06');
    expect(text()).toContain('Q not determined');
    expect(text()).toContain('The data do not determine Q: only the sum of the two diagonal entries is seen at these lags.');
    expect(text()).toContain('Diagonal 98.0× to 102× the assumed.');
    expect(text()).toContain('8.30× expected (mean NIS 8.3 against m = 1)');
  });

  it('words the margins, marks the one below its floor, and shows the service’s warning with a shape and a word', async () => {
    await open(study());
    expect(cells('gainUpper')).toEqual(['+9.1 dB|Meets floor', '+4.2 dB|Below floor', 'at least +6 dB']);
    expect(cells('gainLower')).toEqual(['unlimited|Meets floor', 'unlimited|Meets floor', 'at most −6 dB']);
    expect(cells('phase')[0]).toBe('48.2°|Meets floor');
    expect(fixture.nativeElement.querySelector('tr[data-margin=gainUpper] wc-signal-mark[data-mark=warning] svg[data-shape=triangle]')).not.toBeNull();
    const warning = fixture.nativeElement.querySelector('.warning') as HTMLElement;
    expect(warning.querySelector('wc-signal-mark[data-mark=warning] svg[data-shape=triangle]')).not.toBeNull();
    expect(warning.textContent).toContain('Warning');
    expect(warning.textContent).toContain('below the 6 dB floor');
  });

  it('says the margins are not meaningful when the closed loop is unstable', async () => {
    const unstable = margins({ closedLoopStable: false, gainMarginUpperDb: null, phaseMarginDeg: null, diskAlpha: null });
    await open(study({ loop: { ...study().loop!, marginsProposed: unstable, warnings: [] } }));
    expect(cells('disk')).toEqual(['α = 0.72 (gain ±6.5 dB, phase ±40°)|Meets floor', 'not meaningful (closed loop unstable)|Unstable', 'α at least 0.4']);
  });

  it('creates a draft revision once and shows its number', async () => {
    await open(study());
    const button = [...fixture.nativeElement.querySelectorAll('button')].find((b: HTMLButtonElement) => b.textContent?.includes('Create draft revision')) as HTMLButtonElement;
    expect(button.disabled).toBe(false);
    button.click();
    await settle();
    const req = http.expectOne('/api/studies/5/draft-revision');
    expect(req.request.method).toBe('POST');
    req.flush({ revisionId: 41, revision: 3 }, { status: 201, statusText: 'Created' });
    await settle();
    http.expectOne('/api/studies/5').flush(study({ draftRevisionId: 41 }));
    await settle();
    expect(fixture.nativeElement.querySelector('[data-testid=draft-revision]')?.textContent).toBe('3');
    expect(button.disabled).toBe(true);
  });

  it('explains a draft made already, with the button disabled', async () => {
    await open(study({ draftRevisionId: 41 }));
    expect(text()).toContain('A draft revision of tractor-position was made from this study (revision id 41).');
    const button = [...fixture.nativeElement.querySelectorAll('button')].find((b: HTMLButtonElement) => b.textContent?.includes('Create draft revision')) as HTMLButtonElement;
    expect(button.disabled).toBe(true);
  });

  it('says when there is no regulator gain to check the loop with', async () => {
    await open(study({ loop: null }));
    expect(text()).toContain('Not checked');
    expect(fixture.nativeElement.querySelector('wc-loop-check')).toBeNull();
  });
});

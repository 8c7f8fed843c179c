import { provideHttpClient } from '@angular/common/http';
import { HttpTestingController, provideHttpClientTesting } from '@angular/common/http/testing';
import { provideZonelessChangeDetection } from '@angular/core';
import { TestBed, type ComponentFixture } from '@angular/core/testing';
import { Router, provideRouter } from '@angular/router';
import type { DesignSummary } from '../../../../../shared/src/api/api-types';
import { DESIGN_REVISION_CAUTION } from '../../../../../shared/src/design/design-validation';
import { RevisionEditor } from './revision-editor';
import type { DesignRevisionDetail } from './revisions-api';

const tractor = {
  A: [[1, 0, 1, 0], [0, 1, 0, 1], [0, 0, 1, 0], [0, 0, 0, 1]],
  C: [[1, 0, 0, 0], [0, 1, 0, 0]],
  G: [[0.5, 0], [0, 0.5], [1, 0], [0, 1]],
  Q: [[0.05, 0], [0, 0.05]],
  R: [[0.25, 0], [0, 0.25]],
  dt: 1,
};

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

const revision2: DesignRevisionDetail = {
  id: 12,
  designId: 1,
  designKey: 'tractor-position',
  designName: 'Tractor planar position/velocity',
  revision: 2,
  status: 'released',
  stateDim: 4,
  measurementDim: 2,
  model: tractor,
  notes: '',
  createdAt: '2026-02-01T00:00:00Z',
  estimators: 8,
  check: { problems: [], warnings: [] },
  caution: DESIGN_REVISION_CAUTION,
};

describe('RevisionEditor', () => {
  let fixture: ComponentFixture<RevisionEditor>;
  let http: HttpTestingController;
  let navigated: unknown[][] = [];
  const el = () => fixture.nativeElement as HTMLElement;
  const text = (node: Element | null = el()) => (node?.textContent ?? '').replace(/\s+/g, ' ');
  const matrix = (key: string) => el().querySelector(`wc-matrix-editor[data-matrix="${key}"]`);
  const cell = (key: string, i: number, j: number) => el().querySelector<HTMLInputElement>(`input[aria-label="${key} row ${i}, column ${j}"]`)!;
  const settle = async () => {
    await new Promise((r) => setTimeout(r, 0));
    await fixture.whenStable();
  };
  const type = async (input: HTMLInputElement, value: string) => {
    input.value = value;
    input.dispatchEvent(new Event('input'));
    await settle();
  };
  const upload = async (name: string, content: string) => {
    const input = el().querySelector<HTMLInputElement>('input[type=file]')!;
    const file = new File([content], name, { type: 'application/json' });
    // jest's jsdom has no Blob.text(); browsers do.
    if (typeof file.text !== 'function') Object.defineProperty(file, 'text', { value: async () => content });
    Object.defineProperty(input, 'files', { value: [file], configurable: true });
    input.dispatchEvent(new Event('change'));
    for (let i = 0; i < 5; i++) await settle(); // file.text() resolves on its own turn
  };
  const save = async () => {
    el().querySelector<HTMLButtonElement>('button[type=submit]')!.click();
    await settle();
  };

  beforeEach(async () => {
    TestBed.configureTestingModule({ providers: [provideZonelessChangeDetection(), provideHttpClient(), provideHttpClientTesting(), provideRouter([])] });
    http = TestBed.inject(HttpTestingController);
    navigated = [];
    jest.spyOn(TestBed.inject(Router), 'navigate').mockImplementation(async (commands, extras) => {
      navigated.push([commands, extras]);
      return true;
    });
    fixture = TestBed.createComponent(RevisionEditor);
    fixture.componentRef.setInput('id', '1');
    await settle();
    http.expectOne('/api/designs').flush({ items: designs });
    await settle();
    http.expectOne('/api/designs/1/revisions/12').flush(revision2);
    await settle();
  });
  afterEach(() => http.verify());

  it('starts from the newest revision, with the caution and the check passed', () => {
    expect(text()).toContain('New revision of Tractor planar position/velocity');
    expect(text(el().querySelector('wc-caution-banner'))).toContain(DESIGN_REVISION_CAUTION);
    expect(text()).toContain('The editor holds revision 2 (released).');
    expect(cell('A', 1, 3).value).toBe('1');
    expect(text(el().querySelector('[data-testid=check-summary]'))).toContain('Passes the checks');
    expect([...el().querySelectorAll('wc-matrix-editor')].map((m) => m.getAttribute('data-matrix'))).toEqual(['A', 'C', 'G', 'Q', 'R']);
  });

  it('checks as you type: a non-symmetric Q is flagged beside Q, and Save does not send it', async () => {
    await type(cell('Q', 1, 2), '0.01');
    expect(text(matrix('Q'))).toMatch(/Q must be symmetric \(a covariance\): row 1, column 2 is 0\.01 but row 2, column 1 is 0/);
    expect(text(el().querySelector('[data-testid=check-summary]'))).toContain('1 problem');
    await type(cell('A', 2, 2), 'x');
    expect(cell('A', 2, 2).classList).toContain('bad');
    expect(text(matrix('A'))).toContain('A row 2, column 2 must be a finite number, not the text "x"');
    await save();
    expect(text()).toContain('Not saved: the model still has 2 problems.');
    http.expectNone('/api/designs/1/revisions');
  });

  it('resizes the matrices with the number of states and says when C no longer fits after an upload', async () => {
    const n = el().querySelector<HTMLInputElement>('input[type=number]')!;
    await type(n, '5');
    expect(el().querySelectorAll('input[aria-label^="A row 5"]')).toHaveLength(5);
    expect(text(matrix('C'))).toContain('2 × 5');
    await type(n, '40');
    expect(text()).toContain('States (n) must be a whole number from 1 to 16');
  });

  it('uploads a JSON file into the editor and shows its problems beside their matrices, and what it could not take', async () => {
    await upload('bad.json', JSON.stringify({ ...tractor, C: [[1, 0, 0]], R: [[0.25, 0.5], [0.5, 0.25]], gain: 3 }));
    const report = text(el().querySelector('[data-testid=upload-report]'));
    expect(report).toContain('bad.json (1 KB) is in the editor with 3 problems.');
    expect(report).toContain('gain: "gain" is not part of a design model');
    expect(text(matrix('C'))).toContain('C is 1 × 3; it must be 1 × 4');
    expect(text(matrix('R'))).toContain('R is 2 × 2; it must be 1 × 1');
    el().querySelector<HTMLButtonElement>('wc-matrix-editor[data-matrix="C"] button')!.click();
    await settle();
    expect(cell('C', 1, 4).value).toBe('0');
  });

  it('refuses a file that is not JSON, and one over 256 KB, leaving the editor as it was', async () => {
    await upload('notes.json', 'A = [1 0; 0 1]');
    expect(text(el().querySelector('[data-testid=upload-report]'))).toMatch(/notes\.json is not valid JSON: .* Nothing was taken into the editor\./);
    await upload('huge.json', ' '.repeat(300 * 1024));
    expect(text(el().querySelector('[data-testid=upload-report]'))).toContain('huge.json is 300 KB; a design file may be at most 256 KB.');
    expect(cell('A', 1, 3).value).toBe('1');
  });

  it('saves a checked model as a draft and opens the design with it', async () => {
    await upload('good.json', JSON.stringify({ model: { ...tractor, Q: [[0.5, 0], [0, 0.5]] }, notes: 'Q ten times larger' }));
    expect(text(el().querySelector('[data-testid=upload-report]'))).toContain('good.json (1 KB) is in the editor and passes every check.');
    await save();
    const req = http.expectOne('/api/designs/1/revisions');
    expect(req.request.method).toBe('POST');
    expect(req.request.body).toEqual({ model: { ...tractor, Q: [[0.5, 0], [0, 0.5]] }, notes: 'Q ten times larger', status: 'draft' });
    req.flush({ id: 40, designId: 1, designKey: 'tractor-position', revision: 3, status: 'draft', stateDim: 4, measurementDim: 2, warnings: [], caution: DESIGN_REVISION_CAUTION });
    await settle();
    expect(navigated).toEqual([[['/workbench/designs', 1], { queryParams: { saved: 40 } }]]);
  });

  it('shows the service’s problems when it refuses, beside the matrix they concern', async () => {
    await save();
    http.expectOne('/api/designs/1/revisions').flush(
      {
        type: 'https://whitecap.invalid/problems/invalid-design-model',
        title: 'The design model has problems',
        status: 400,
        detail: '1 problem in the model, nothing saved.',
        errors: [{ where: 'body', path: 'model.R', message: 'R is refused by a newer rule' }],
      },
      { status: 400, statusText: 'Bad Request' },
    );
    await settle();
    expect(text(el().querySelector('[data-testid=service-refusal]'))).toContain('Not saved. 1 problem in the model, nothing saved.');
    expect(text(matrix('R'))).toContain('R is refused by a newer rule');
  });
});

import { provideHttpClient } from '@angular/common/http';
import { HttpTestingController, provideHttpClientTesting } from '@angular/common/http/testing';
import { provideZonelessChangeDetection } from '@angular/core';
import { TestBed, type ComponentFixture } from '@angular/core/testing';
import { provideRouter } from '@angular/router';
import type { Ability } from '../../../../../shared/src/api/api-types';
import { DESIGN_REVISION_CAUTION } from '../../../../../shared/src/design/design-validation';
import { Session } from '../../auth/session';
import { RevisionView } from './revision-view';
import type { DesignRevisionDetail } from './revisions-api';

const draft: DesignRevisionDetail = {
  id: 40,
  designId: 1,
  designKey: 'tractor-position',
  designName: 'Tractor planar position/velocity',
  revision: 3,
  status: 'draft',
  stateDim: 2,
  measurementDim: 1,
  model: { A: [[1, 1], [0, 1]], C: [[1, 0]], Q: [[0.01, 0], [0, 0.01]], R: [[0.25]], dt: 1 },
  notes: 'Q raised.\n\nSaved by Dana Whitlow (estimator design).',
  createdAt: '2026-03-01T00:00:00Z',
  estimators: 0,
  check: { problems: [], warnings: [] },
  caution: DESIGN_REVISION_CAUTION,
};

describe('RevisionView', () => {
  let fixture: ComponentFixture<RevisionView>;
  let http: HttpTestingController;
  const text = () => ((fixture.nativeElement as HTMLElement).textContent ?? '').replace(/\s+/g, ' ');
  const button = (name: string) =>
    [...(fixture.nativeElement as HTMLElement).querySelectorAll('button')].find((b) => b.textContent?.trim() === name) ?? null;
  const settle = async () => {
    await new Promise((r) => setTimeout(r, 0));
    await fixture.whenStable();
  };

  async function open(role: 'designer' | 'admin', revision = draft): Promise<void> {
    TestBed.configureTestingModule({
      providers: [
        provideZonelessChangeDetection(),
        provideHttpClient(),
        provideHttpClientTesting(),
        provideRouter([]),
        { provide: Session, useValue: { can: (a: Ability) => a !== 'administer' || role === 'admin' } },
      ],
    });
    http = TestBed.inject(HttpTestingController);
    fixture = TestBed.createComponent(RevisionView);
    fixture.componentRef.setInput('id', '1');
    fixture.componentRef.setInput('revisionId', String(revision.id));
    await settle();
    http.expectOne(`/api/designs/1/revisions/${revision.id}`).flush(revision);
    await settle();
  }
  afterEach(() => http.verify());

  it('shows the revision read-only: status, caution, each matrix as a table, the notes; no status buttons for a designer', async () => {
    await open('designer');
    expect(text()).toContain('tractor-position revision 3');
    expect(text()).toContain('Draft');
    expect(text()).toContain(DESIGN_REVISION_CAUTION);
    const tables = [...(fixture.nativeElement as HTMLElement).querySelectorAll('wc-matrix-table table')].map((t) => t.getAttribute('aria-label'));
    expect(tables).toEqual(['A', 'C', 'Q', 'R']);
    expect((fixture.nativeElement as HTMLElement).querySelectorAll('input')).toHaveLength(0);
    expect(text()).toContain('Saved by Dana Whitlow');
    expect(button('Release')).toBeNull();
  });

  it('lets an administrator release a draft, then shows it released', async () => {
    await open('admin');
    button('Release')!.click();
    await settle();
    const req = http.expectOne('/api/designs/1/revisions/40');
    expect(req.request.method).toBe('PATCH');
    expect(req.request.body).toEqual({ status: 'released' });
    req.flush({ ...draft, status: 'released' });
    await settle();
    expect(text()).toContain('Released');
    expect(button('Release')).toBeNull();
    expect(button('Retire')).not.toBeNull();
  });

  it('lists the problems of a stored model that fails the check and offers no release', async () => {
    await open('admin', { ...draft, check: { problems: [{ path: 'Q', message: 'Q must be positive semidefinite' }], warnings: [] } });
    expect(text()).toContain('1 problem');
    expect(text()).toContain('Q: Q must be positive semidefinite');
    expect(button('Release')!.disabled).toBe(true);
  });
});

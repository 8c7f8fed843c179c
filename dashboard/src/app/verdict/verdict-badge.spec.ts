import { provideZonelessChangeDetection } from '@angular/core';
import { TestBed } from '@angular/core/testing';
import type { EstimatorVerdict } from '../../../../shared/src/api/api-types';
import { VerdictBadge } from './verdict-badge';

describe('VerdictBadge', () => {
  beforeEach(() => TestBed.configureTestingModule({ providers: [provideZonelessChangeDetection()] }));

  async function render(verdict: EstimatorVerdict): Promise<HTMLElement> {
    const fixture = TestBed.createComponent(VerdictBadge);
    fixture.componentRef.setInput('verdict', verdict);
    await fixture.whenStable();
    return fixture.nativeElement;
  }

  it.each([
    ['consistent', 'Consistent', 'disc', 'var(--wc-verdict-consistent)'],
    ['marginal', 'Marginal', 'triangle', 'var(--wc-verdict-marginal)'],
    ['inconsistent', 'Inconsistent', 'diamond', 'var(--wc-verdict-inconsistent)'],
    ['silent', 'Silent', 'ring', 'var(--wc-verdict-silent)'],
  ] as const)('shows %s by its colour, its shape and its word together', async (verdict, word, shape, colour) => {
    const el = await render(verdict);
    expect(el.textContent?.trim()).toBe(word);
    expect(el.querySelector('svg')?.getAttribute('data-shape')).toBe(shape);
    expect(el.querySelector('svg')?.querySelector('circle, path')).not.toBeNull();
    expect(el.style.getPropertyValue('--wc-badge-colour')).toBe(colour);
    expect(el.getAttribute('aria-label')).toBe(`Verdict: ${word}`);
  });

  it('gives every verdict a different shape, so none depends on colour alone', async () => {
    const shapes = new Set<string | null>();
    for (const v of ['consistent', 'marginal', 'inconsistent', 'silent'] as const) {
      shapes.add((await render(v)).querySelector('svg')!.getAttribute('data-shape'));
    }
    expect(shapes.size).toBe(4);
  });
});

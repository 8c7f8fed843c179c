import type { EstimatorVerdict } from '../../../../shared/src/api/api-types';

/** How each verdict looks: a colour, a shape and a word, always together. */
export interface VerdictLook {
  word: string;
  /** A CSS colour (one of the palette's verdict variables). */
  colour: string;
  shape: 'disc' | 'triangle' | 'diamond' | 'ring';
  /** The shape as a text glyph, for chart labels and tooltips. */
  glyph: string;
  /** One line on what the verdict means. */
  meaning: string;
}

export const VERDICT_LOOK: Record<EstimatorVerdict, VerdictLook> = {
  consistent: {
    word: 'Consistent',
    colour: 'var(--wc-verdict-consistent)',
    shape: 'disc',
    glyph: '●',
    meaning: 'The innovations agree with the uncertainty the filter reports.',
  },
  marginal: {
    word: 'Marginal',
    colour: 'var(--wc-verdict-marginal)',
    shape: 'triangle',
    glyph: '▲',
    meaning: 'A window test is close to rejecting, or samples were lost or out of order recently.',
  },
  inconsistent: {
    word: 'Inconsistent',
    colour: 'var(--wc-verdict-inconsistent)',
    shape: 'diamond',
    glyph: '◆',
    meaning: 'The innovations do not match the filter’s own uncertainty: a window test rejects or the drift check signalled.',
  },
  silent: {
    word: 'Silent',
    colour: 'var(--wc-verdict-silent)',
    shape: 'ring',
    glyph: '○',
    meaning: 'No sample has arrived for longer than expected.',
  },
};

export const VERDICTS: EstimatorVerdict[] = ['inconsistent', 'marginal', 'silent', 'consistent'];

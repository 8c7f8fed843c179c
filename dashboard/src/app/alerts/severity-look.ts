import type { AlertSeverity, AlertState } from '../../../../shared/src/api/api-types';

export interface SeverityLook {
  word: string;
  colour: string;
  shape: 'octagon' | 'triangle' | 'disc';
  glyph: string;
}

/** Alert severities as colour, shape and word together. */
export const SEVERITY_LOOK: Record<AlertSeverity, SeverityLook> = {
  critical: { word: 'Critical', colour: 'var(--wc-magenta)', shape: 'octagon', glyph: '⯃' },
  warning: { word: 'Warning', colour: 'var(--wc-ochre)', shape: 'triangle', glyph: '▲' },
  info: { word: 'Info', colour: 'var(--wc-teal-500)', shape: 'disc', glyph: '●' },
};

export const SEVERITIES: AlertSeverity[] = ['critical', 'warning', 'info'];

export const STATE_WORD: Record<AlertState, string> = {
  open: 'Open',
  acknowledged: 'Acknowledged',
  resolved: 'Resolved',
};

/** What each rule watches, in words. */
export const RULE_WORDS: Record<string, string> = {
  'nis-window': 'NIS window test',
  'cusum-drift': 'CUSUM drift',
  whiteness: 'Whiteness',
  bias: 'Bias',
  'nees-window': 'NEES window test',
  'lost-samples': 'Lost samples',
  silence: 'Silence',
  'quarantine-rate': 'Quarantine rate',
};

export function ruleWords(rule: string): string {
  return RULE_WORDS[rule] ?? rule;
}

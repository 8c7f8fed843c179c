// Structured logs (pino, JSON lines on stdout).
import pino, { type Logger } from 'pino';

export type { Logger };

export function createLogger(level: string, name = 'whitecap'): Logger {
  return pino({ name, level, base: { pid: process.pid } });
}

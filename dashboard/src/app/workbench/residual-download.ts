import { HttpErrorResponse } from '@angular/common/http';
import { DOCUMENT } from '@angular/common';
import { DestroyRef, Injectable, computed, inject, signal } from '@angular/core';
import { Session } from '../auth/session';
import { problemMessage } from '../feedback/problem-message';
import { defaultExportName, dispositionFileName, rowCounter, type ExportFormat } from './row-counter';

export interface ResidualQuery {
  estimatorIds: number[];
  from: Date;
  to: Date;
  format: ExportFormat;
}

export type DownloadPhase = 'idle' | 'waiting' | 'receiving' | 'saved' | 'failed' | 'cancelled';

/** Where a residual download stands: bytes and rows received so far, the size when the service tells it. */
export interface DownloadState {
  phase: DownloadPhase;
  bytes: number;
  /** From Content-Length, when the body is not compressed on the way. */
  totalBytes: number | null;
  rows: number;
  /** The rows the service expects to send (its X-Whitecap-Estimated-Rows header), when it says. */
  expectedRows: number | null;
  fileName: string | null;
  message: string | null;
}

const IDLE: DownloadState = { phase: 'idle', bytes: 0, totalBytes: null, rows: 0, expectedRows: null, fileName: null, message: null };

/** How often the progress shown is refreshed while bytes arrive. */
const PROGRESS_EVERY_MS = 100;

/**
 * Downloads GET /api/residuals as a stream from our own service, counting bytes and rows as
 * they arrive, then saves the file from a Blob through an object URL. One per export panel.
 */
@Injectable()
export class ResidualDownload {
  private readonly session = inject(Session);
  private readonly document = inject(DOCUMENT);
  private readonly current = signal<DownloadState>(IDLE);
  private abort: AbortController | null = null;

  readonly state = this.current.asReadonly();

  constructor() {
    inject(DestroyRef).onDestroy(() => this.abort?.abort());
  }

  readonly busy = computed(() => {
    const phase = this.current().phase;
    return phase === 'waiting' || phase === 'receiving';
  });

  cancel(): void {
    this.abort?.abort();
  }

  async download(query: ResidualQuery): Promise<void> {
    if (this.busy()) return;
    const abort = new AbortController();
    this.abort = abort;
    this.current.set({ ...IDLE, phase: 'waiting' });
    const params = new URLSearchParams({
      estimatorIds: query.estimatorIds.join(','),
      from: query.from.toISOString(),
      to: query.to.toISOString(),
      format: query.format,
    });
    try {
      const res = await this.fetchSigned(`/api/residuals?${params}`, abort.signal);
      if (!res.ok) {
        const body = await res.json().catch(() => null);
        this.current.set({ ...IDLE, phase: 'failed', message: problemMessage(new HttpErrorResponse({ status: res.status, error: body })) });
        return;
      }
      const fileName = dispositionFileName(res.headers.get('content-disposition')) ?? defaultExportName(query.from, query.to, query.format);
      const length = Number(res.headers.get('content-length'));
      const totalBytes = !res.headers.get('content-encoding') && length > 0 ? length : null;
      const expected = Number(res.headers.get('x-whitecap-estimated-rows'));
      const expectedRows = Number.isFinite(expected) && expected > 0 ? expected : null;
      const type = res.headers.get('content-type') ?? (query.format === 'csv' ? 'text/csv' : 'application/json');
      const blob = await this.receive(res, query.format, { fileName, totalBytes, expectedRows }, type);
      this.save(blob, fileName);
      this.current.update((s) => ({ ...s, phase: 'saved', message: null }));
    } catch (err) {
      if (abort.signal.aborted) {
        this.current.update((s) => ({ ...s, phase: 'cancelled', message: 'Download cancelled; nothing was saved.' }));
      } else {
        this.current.update((s) => ({
          ...s,
          phase: 'failed',
          message: err instanceof TypeError ? 'The download broke off: Whitecap could not be reached. Check your connection and try again.' : `The download failed: ${String(err)}`,
        }));
      }
    } finally {
      if (this.abort === abort) this.abort = null;
    }
  }

  /** Reads the body chunk by chunk, counting; keeps the chunks for the file. */
  private async receive(
    res: Response,
    format: ExportFormat,
    expect: Pick<DownloadState, 'fileName' | 'totalBytes' | 'expectedRows'>,
    type: string,
  ): Promise<Blob> {
    const counter = rowCounter(format);
    const decoder = new TextDecoder();
    const chunks: BlobPart[] = [];
    let bytes = 0;
    let shownAt = 0;
    this.current.set({ ...IDLE, ...expect, phase: 'receiving' });
    const reader = res.body?.getReader();
    if (!reader) {
      const whole = await res.blob();
      counter.push(await whole.text());
      this.current.update((s) => ({ ...s, bytes: whole.size, rows: counter.rows }));
      return whole;
    }
    for (;;) {
      const { done, value } = await reader.read();
      if (done) break;
      chunks.push(value as Uint8Array<ArrayBuffer>);
      bytes += value.byteLength;
      counter.push(decoder.decode(value, { stream: true }));
      const now = performance.now();
      if (now - shownAt >= PROGRESS_EVERY_MS) {
        shownAt = now;
        this.current.update((s) => ({ ...s, bytes, rows: counter.rows }));
      }
    }
    counter.push(decoder.decode());
    this.current.update((s) => ({ ...s, bytes, rows: counter.rows }));
    return new Blob(chunks, { type });
  }

  /** Calls our own API with the session's token; after a 401 it refreshes the session once and tries again. */
  private async fetchSigned(url: string, signal: AbortSignal): Promise<Response> {
    const attempt = () => {
      const token = this.session.token();
      return fetch(url, { headers: token ? { Authorization: `Bearer ${token}` } : {}, signal, credentials: 'same-origin' });
    };
    const res = await attempt();
    if (res.status !== 401 || !this.session.token()) return res;
    return (await this.session.refresh()) ? attempt() : res;
  }

  private save(blob: Blob, fileName: string): void {
    const view = this.document.defaultView;
    if (!view) return;
    const url = view.URL.createObjectURL(blob);
    const link = this.document.createElement('a');
    link.href = url;
    link.download = fileName;
    link.rel = 'noopener';
    link.style.display = 'none';
    this.document.body.appendChild(link);
    link.click();
    link.remove();
    // Give the browser time to start writing the file before the URL goes.
    view.setTimeout(() => view.URL.revokeObjectURL(url), 60_000);
  }
}

import { Injectable, inject } from '@angular/core';
import type { UploadReport } from '../../../../../shared/src/api/api-types';
import { Session } from '../../auth/session';

/** The server's limit (ingest/src/workbench/residual-upload.ts). */
export const UPLOAD_LIMIT_BYTES = 50 * 1024 * 1024;

/** A file too large to send, said plainly; null when it fits. */
export function sizeProblem(file: File): string | null {
  if (file.size > UPLOAD_LIMIT_BYTES) {
    return `${file.name} is ${(file.size / 1024 / 1024).toFixed(1)} MB; an upload may be at most 50 MB. Split the log into several files and upload each.`;
  }
  if (file.size === 0) return `${file.name} is empty.`;
  return null;
}

/** Sends a CSV to POST /api/residual-uploads with XMLHttpRequest, for its upload progress events (same origin). */
@Injectable({ providedIn: 'root' })
export class ResidualUploadSender {
  private readonly session = inject(Session);

  send(file: File, designRevisionId: number, name: string, onProgress: (fraction: number) => void): Promise<UploadReport> {
    const attempt = () =>
      new Promise<{ status: number; body: any }>((resolve, reject) => {
        const xhr = new XMLHttpRequest();
        const params = new URLSearchParams({ designRevisionId: String(designRevisionId), name });
        xhr.open('POST', `/api/residual-uploads?${params.toString()}`);
        const token = this.session.token();
        if (token) xhr.setRequestHeader('Authorization', `Bearer ${token}`);
        xhr.setRequestHeader('Content-Type', 'text/csv');
        xhr.upload.onprogress = (e) => {
          if (e.lengthComputable) onProgress(e.loaded / e.total);
        };
        xhr.onload = () => {
          let body: any = null;
          try {
            body = xhr.responseText ? JSON.parse(xhr.responseText) : null;
          } catch {
            body = null;
          }
          resolve({ status: xhr.status, body });
        };
        xhr.onerror = () => reject(new Error('The upload did not reach the service (network error or the connection was closed).'));
        xhr.send(file);
      });
    return (async () => {
      let res = await attempt();
      if (res.status === 401 && (await this.session.refresh())) res = await attempt();
      if (res.status === 201) return res.body as UploadReport;
      throw new Error(res.body?.detail ?? res.body?.title ?? `The service answered ${res.status}.`);
    })();
  }
}

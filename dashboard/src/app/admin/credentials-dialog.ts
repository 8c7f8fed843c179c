import { Clipboard } from '@angular/cdk/clipboard';
import { ChangeDetectionStrategy, Component, inject, signal } from '@angular/core';
import { MatButtonModule } from '@angular/material/button';
import { MAT_DIALOG_DATA, MatDialogModule } from '@angular/material/dialog';
import type { IssuedCredentials } from './admin-api';

/** Shows a unit's new device credentials once, with copy buttons; the secret is gone when the dialog closes. */
@Component({
  selector: 'wc-credentials-dialog',
  imports: [MatDialogModule, MatButtonModule],
  template: `
    <h2 mat-dialog-title>Device credentials for {{ data.username }}</h2>
    <mat-dialog-content>
      <p class="warning" role="alert">
        <span class="material-symbols-outlined" aria-hidden="true">warning</span>
        This is the only time the secret is shown. Store it on the unit now; Whitecap keeps only its hash.
      </p>
      <dl>
        <dt>MQTT username</dt>
        <dd>
          <code>{{ data.username }}</code>
          <button mat-button type="button" (click)="copy('username', data.username)">{{ copied() === 'username' ? 'Copied' : 'Copy' }}</button>
        </dd>
        <dt>Secret</dt>
        <dd>
          <code class="secret">{{ data.secret }}</code>
          <button mat-button type="button" (click)="copy('secret', data.secret)">{{ copied() === 'secret' ? 'Copied' : 'Copy secret' }}</button>
        </dd>
      </dl>
      <p class="status" role="status">{{ copied() ? 'Copied to the clipboard.' : '' }}</p>
    </mat-dialog-content>
    <mat-dialog-actions align="end">
      <button mat-flat-button type="button" mat-dialog-close>I have stored it</button>
    </mat-dialog-actions>
  `,
  styles: `
    .warning {
      display: flex; gap: 8px; align-items: flex-start;
      padding: 8px 12px; border-left: 4px solid var(--wc-ochre);
      background: color-mix(in srgb, var(--wc-ochre) 14%, transparent);
    }
    dt { font-size: 0.8rem; color: var(--mat-sys-on-surface-variant); margin-top: 8px; }
    dd { margin: 2px 0 0; display: flex; align-items: center; gap: 8px; flex-wrap: wrap; }
    code { font-family: ui-monospace, 'DejaVu Sans Mono', monospace; padding: 4px 8px; border-radius: 4px; background: var(--mat-sys-surface-container); overflow-wrap: anywhere; }
    .status { min-height: 1.2em; margin: 8px 0 0; font-size: 0.85rem; }
  `,
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class CredentialsDialog {
  private readonly clipboard = inject(Clipboard);
  protected readonly data = inject<IssuedCredentials>(MAT_DIALOG_DATA);
  protected readonly copied = signal<'username' | 'secret' | null>(null);

  protected copy(what: 'username' | 'secret', text: string): void {
    if (this.clipboard.copy(text)) this.copied.set(what);
  }
}

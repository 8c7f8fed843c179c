import { ChangeDetectionStrategy, Component } from '@angular/core';
import { MatTabsModule } from '@angular/material/tabs';
import { EstimatorsAdmin } from './estimators-admin';
import { SitesAdmin } from './sites-admin';
import { UnitsAdmin } from './units-admin';
import { UsersAdmin } from './users-admin';

/** Administration: users and roles, sites, units and their device credentials, estimators. */
@Component({
  selector: 'wc-admin',
  imports: [MatTabsModule, UsersAdmin, SitesAdmin, UnitsAdmin, EstimatorsAdmin],
  template: `
    <header>
      <h1>Administration</h1>
      <p class="sub">Who may do what, and which units may publish. Changes take effect at once.</p>
    </header>
    <mat-tab-group mat-stretch-tabs="false" animationDuration="0ms" class="card">
      <mat-tab label="Users"><ng-template matTabContent><wc-users-admin /></ng-template></mat-tab>
      <mat-tab label="Sites"><ng-template matTabContent><wc-sites-admin /></ng-template></mat-tab>
      <mat-tab label="Units and credentials"><ng-template matTabContent><wc-units-admin /></ng-template></mat-tab>
      <mat-tab label="Estimators"><ng-template matTabContent><wc-estimators-admin /></ng-template></mat-tab>
    </mat-tab-group>
  `,
  styles: `
    :host { display: flex; flex-direction: column; gap: 16px; }
    h1 { margin: 0; font: var(--mat-sys-headline-medium); }
    .sub { margin: 4px 0 0; color: var(--mat-sys-on-surface-variant); }
    .card {
      padding: 8px 16px 16px;
      border-radius: 12px;
      border: 1px solid var(--mat-sys-outline-variant);
      background: var(--mat-sys-surface-container-low);
    }
  `,
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class Admin {}

import { HttpClient, HttpParams } from '@angular/common/http';
import { ChangeDetectionStrategy, Component, computed, effect, inject } from '@angular/core';
import { toSignal } from '@angular/core/rxjs-interop';
import { MatButtonModule } from '@angular/material/button';
import { MatTooltipModule } from '@angular/material/tooltip';
import { Router, RouterLink, RouterLinkActive, RouterOutlet } from '@angular/router';
import { auditTime, catchError, interval, map, merge, of, startWith, switchMap } from 'rxjs';
import type { Ability, AlertList } from '../../../../shared/src/api/api-types';
import { Session } from '../auth/session';
import { LiveEvents } from '../live/live-events';
import { ServiceStatus } from './service-status';
import { ThemeChoiceStore } from './theme-choice';
import { WhitecapMark } from './whitecap-mark';

interface NavItem {
  path: string;
  label: string;
  icon: string;
  ability: Ability;
}

const NAV: NavItem[] = [
  { path: '/fleet', label: 'Fleet', icon: 'monitoring', ability: 'read' },
  { path: '/alerts', label: 'Alerts', icon: 'notifications_active', ability: 'read' },
  { path: '/rota', label: 'Watch rota', icon: 'event_repeat', ability: 'read' },
  { path: '/notifications', label: 'Notifications', icon: 'forward_to_inbox', ability: 'respond' },
  { path: '/quarantine', label: 'Quarantine', icon: 'gpp_maybe', ability: 'quarantine' },
  { path: '/workbench', label: 'Workbench', icon: 'tune', ability: 'design' },
  { path: '/admin', label: 'Administration', icon: 'admin_panel_settings', ability: 'administer' },
];

const ROLE_WORDS = { viewer: 'viewer', responder: 'responder', designer: 'designer', admin: 'admin' } as const;

/** The frame around every signed-in screen: navigation by role, who is signed in, live status, theme, sign-out. */
@Component({
  selector: 'wc-shell',
  imports: [RouterOutlet, RouterLink, RouterLinkActive, MatButtonModule, MatTooltipModule, WhitecapMark, ServiceStatus],
  templateUrl: './shell.html',
  styleUrl: './shell.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class Shell {
  private readonly session = inject(Session);
  private readonly router = inject(Router);
  private readonly http = inject(HttpClient);
  private readonly live = inject(LiveEvents);
  protected readonly theme = inject(ThemeChoiceStore);
  protected readonly user = this.session.user;
  protected readonly roleWord = computed(() => ROLE_WORDS[this.session.role() ?? 'viewer']);
  protected readonly nav = computed(() => NAV.filter((item) => this.session.can(item.ability)));
  protected readonly liveStatus = this.live.status;
  protected readonly themeIcon = computed(
    () => ({ system: 'contrast', light: 'light_mode', dark: 'dark_mode' })[this.theme.choice()],
  );

  /** Open alerts, for the count beside "Alerts"; refreshed on live alert changes (this keeps the live stream open). */
  protected readonly openAlerts = toSignal(
    merge(this.live.alerts$.pipe(auditTime(1000)), interval(60_000)).pipe(
      startWith(null),
      switchMap(() =>
        this.http
          .get<AlertList>('/api/alerts', { params: new HttpParams().set('state', 'open').set('limit', 1) })
          .pipe(
            map((r) => r.total),
            catchError(() => of(null)),
          ),
      ),
    ),
    { initialValue: null },
  );

  constructor() {
    effect(() => this.leaveWhenSignedOut());
  }

  protected nextTheme(): void {
    this.theme.next();
  }

  protected async signOut(): Promise<void> {
    await this.session.signOut();
  }

  /** When the session ends (signed out, or it could not be refreshed), go to the sign-in screen. */
  private leaveWhenSignedOut(): void {
    if (this.session.user()) return;
    const expired = this.session.ended() === 'expired';
    void this.router.navigate(['/sign-in'], expired ? { queryParams: { returnUrl: this.router.url } } : {});
  }
}

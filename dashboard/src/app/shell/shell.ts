import { ChangeDetectionStrategy, Component, computed, inject } from '@angular/core';
import { MatButtonModule } from '@angular/material/button';
import { MatToolbarModule } from '@angular/material/toolbar';
import { MatTooltipModule } from '@angular/material/tooltip';
import { Router, RouterOutlet } from '@angular/router';
import { Session } from '../auth/session';
import { ThemeChoiceStore } from './theme-choice';
import { WhitecapMark } from './whitecap-mark';

@Component({
  selector: 'wc-shell',
  imports: [RouterOutlet, MatToolbarModule, MatButtonModule, MatTooltipModule, WhitecapMark],
  templateUrl: './shell.html',
  styleUrl: './shell.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class Shell {
  private readonly session = inject(Session);
  private readonly router = inject(Router);
  protected readonly theme = inject(ThemeChoiceStore);
  protected readonly user = this.session.user;
  protected readonly themeIcon = computed(
    () => ({ system: 'contrast', light: 'light_mode', dark: 'dark_mode' })[this.theme.choice()],
  );

  protected signOut(): void {
    this.session.signOut();
    void this.router.navigateByUrl('/sign-in');
  }
}

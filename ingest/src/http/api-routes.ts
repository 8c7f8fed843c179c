// Every API route behind sign-in, assembled from the resource modules in one place.
import type { Knex } from 'knex';
import { fleetAdminRoutes } from '../admin/fleet-admin-routes';
import { FleetAdminRepository } from '../admin/fleet-admin-repository';
import { designsRoutes } from '../admin/designs-routes';
import { AlertsRepository } from '../alerts/alerts-repository';
import { alertsRoutes } from '../alerts/alerts-routes';
import { AlertsService } from '../alerts/alerts-service';
import { UsersRepository } from '../auth/users-repository';
import type { Clock } from '../clock';
import { EstimatorsRepository } from '../estimators/estimators-repository';
import { estimatorsRoutes } from '../estimators/estimators-routes';
import { SeriesService } from '../estimators/series-service';
import type { ServiceEvents } from '../events';
import { FleetRepository } from '../fleet/fleet-repository';
import { fleetRoutes } from '../fleet/fleet-routes';
import { eventsRoutes } from '../live/events-routes';
import { QuarantineRepository } from '../quarantine/quarantine-repository';
import { quarantineRoutes } from '../quarantine/quarantine-routes';
import { NotifyRepository } from '../notify/notify-repository';
import { notifyRoutes } from '../notify/notify-routes';
import { RotaService } from '../notify/rota-service';
import { usersRoutes } from '../users/users-routes';
import { workbenchRoutes } from '../workbench/workbench-routes';
import { designRevisionsRoutes } from '../workbench/design-revisions-routes';
import type { RouteDef } from './route-table';

export interface ApiSettings {
  windowLength: number;
  alpha: number;
  alphaMarginal: number;
  lags: number;
  arl0: number;
  /** How long one fleet summary serves everyone asking the same question (ms; 0: never shared). */
  fleetCacheMs: number;
}

export function apiRoutes(knex: Knex, events: ServiceEvents, clock: Clock, settings: ApiSettings): RouteDef[] {
  const alertsRepo = new AlertsRepository(knex);
  const estimators = new EstimatorsRepository(knex);
  return [
    ...fleetRoutes(new FleetRepository(knex), clock, settings.fleetCacheMs),
    ...estimatorsRoutes(
      estimators,
      new SeriesService(estimators, { ...settings, statsSamples: 8_000 }),
      clock,
      { windowLength: settings.windowLength, alpha: settings.alpha, alphaMarginal: settings.alphaMarginal, lags: settings.lags },
    ),
    ...alertsRoutes(alertsRepo, new AlertsService(knex, alertsRepo, events, clock)),
    ...quarantineRoutes(new QuarantineRepository(knex), clock),
    ...fleetAdminRoutes(new FleetAdminRepository(knex)),
    ...designsRoutes(knex),
    ...usersRoutes(new UsersRepository(knex)),
    ...notifyRoutes(new NotifyRepository(knex), new RotaService(new NotifyRepository(knex), clock)),
    ...workbenchRoutes(knex),
    ...designRevisionsRoutes(knex),
    ...eventsRoutes(events),
  ];
}

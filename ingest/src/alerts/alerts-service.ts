// What on-call engineers do with alerts: acknowledge, annotate, resolve. Every action is
// recorded in alert_events (who, what, when) and announced on the live stream.
import type { Knex } from 'knex';
import type { AlertDetail, User } from '../../../shared/src/api/api-types';
import type { Clock } from '../clock';
import type { ServiceEvents } from '../events';
import { HttpProblem } from '../http/problem';
import type { AlertsRepository } from './alerts-repository';

export class AlertsService {
  constructor(
    private readonly knex: Knex,
    private readonly repo: AlertsRepository,
    private readonly events: ServiceEvents,
    private readonly clock: Clock,
  ) {}

  async detail(id: number): Promise<AlertDetail> {
    const d = await this.repo.detail(id);
    if (!d) throw new HttpProblem(404, 'not-found', 'No such alert', `There is no alert ${id}.`);
    return d;
  }

  acknowledge(id: number, user: User, note?: string): Promise<AlertDetail> {
    return this.change(id, user, 'acknowledged', async (trx, state) => {
      if (state !== 'open') {
        throw new HttpProblem(409, 'alert-state', 'Cannot acknowledge', `This alert is ${state}; only an open alert can be acknowledged.`);
      }
      await this.repo.setState(trx, id, { state: 'acknowledged', acknowledged_at: trx.fn.now(), acknowledged_by: user.id });
      await this.repo.addEvent(trx, { alertId: id, kind: 'acknowledged', actorUserId: user.id, note: note ?? null });
    });
  }

  addNote(id: number, user: User, text: string): Promise<AlertDetail> {
    return this.change(id, user, 'note', async (trx) => {
      await this.repo.addEvent(trx, { alertId: id, kind: 'note', actorUserId: user.id, note: text });
    });
  }

  resolve(id: number, user: User, note?: string): Promise<AlertDetail> {
    return this.change(id, user, 'resolved', async (trx, state) => {
      if (state === 'resolved') throw new HttpProblem(409, 'alert-state', 'Cannot resolve', 'This alert is already resolved.');
      await this.repo.setState(trx, id, { state: 'resolved', resolved_at: trx.fn.now(), resolved_by: user.id });
      await this.repo.addEvent(trx, { alertId: id, kind: 'resolved', actorUserId: user.id, note: note ?? null });
    });
  }

  private async change(
    id: number,
    user: User,
    kind: 'acknowledged' | 'note' | 'resolved',
    apply: (trx: Knex.Transaction, state: string) => Promise<void>,
  ): Promise<AlertDetail> {
    const before = await this.knex.transaction(async (trx) => {
      const row = await this.repo.lockState(trx, id);
      if (!row) throw new HttpProblem(404, 'not-found', 'No such alert', `There is no alert ${id}.`);
      await apply(trx, row.state);
      return row;
    });
    this.events.emit('alert', {
      kind,
      alertId: id,
      estimatorId: before.estimator_id,
      unitId: null,
      rule: before.rule,
      actor: user.displayName,
      atMs: this.clock.now(),
    });
    return this.detail(id);
  }
}

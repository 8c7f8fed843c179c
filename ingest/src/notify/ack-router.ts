// The acknowledge link from a page e-mail: no password, but signed, single use,
// expiring, and for one person and one alert; the acknowledgement is recorded as
// that person's. GET tells the dashboard's page what the link is for (a mail scanner
// opening the link acknowledges nothing); POST acknowledges.
import express, { type Router } from 'express';
import type { Knex } from 'knex';
import type { AcknowledgeLinkInfo, AcknowledgeLinkResult } from '../../../shared/src/api/api-types';
import type { Clock } from '../clock';
import type { ServiceEvents } from '../events';
import { HttpProblem } from '../http/problem';
import type { NotifyRepository } from './notify-repository';
import { readAckToken } from './signing';

export function ackRouter(deps: { knex: Knex; repo: NotifyRepository; events: ServiceEvents; clock: Clock; linkSecret: string }): Router {
  const router = express.Router();

  const read = async (token: string) => {
    const now = deps.clock.now();
    const t = readAckToken(deps.linkSecret, token, now);
    if (!t.ok && t.reason !== 'expired') throw new HttpProblem(404, 'link-invalid', 'Link not valid', 'This acknowledge link is not one Whitecap made, or it was cut short.');
    // An expired token still names its alert (its signature is good); read it for the page.
    const payload = t.ok ? t.payload : null;
    const nonce = payload?.nonce ?? nonceOf(token);
    const link = nonce ? await deps.repo.ackLink(nonce) : null;
    if (!link) throw new HttpProblem(404, 'link-invalid', 'Link not valid', 'This acknowledge link is not known.');
    return { link, nonce: nonce!, expired: !t.ok || link.expiresAtMs <= now };
  };

  router.get('/:token', async (req, res) => {
    const { link, expired } = await read(req.params.token);
    const facts = await deps.repo.alertFacts(link.alertId);
    if (!facts) throw new HttpProblem(404, 'link-invalid', 'Link not valid', 'The alert this link was for no longer exists.');
    const person = (await deps.repo.people([link.userId])).get(link.userId);
    const reason: AcknowledgeLinkInfo['reason'] = link.usedAtMs !== null ? 'used' : expired ? 'expired' : facts.state !== 'open' ? 'not-open' : null;
    const body: AcknowledgeLinkInfo = {
      alert: {
        id: facts.id,
        rule: facts.rule,
        severity: facts.severity,
        summary: facts.summary,
        unitKey: facts.unitKey,
        estimatorKey: facts.estimatorKey,
        openedAt: new Date(facts.openedAtMs).toISOString(),
        state: facts.state,
      },
      recipient: person?.displayName ?? `user ${link.userId}`,
      expiresAt: new Date(link.expiresAtMs).toISOString(),
      usable: reason === null,
      reason,
    };
    res.set('Cache-Control', 'no-store').json(body);
  });

  router.post('/:token', async (req, res) => {
    const { link, nonce, expired } = await read(req.params.token);
    if (expired) throw new HttpProblem(410, 'link-expired', 'Link expired', 'This acknowledge link has expired; sign in to acknowledge the alert.');
    const person = (await deps.repo.people([link.userId])).get(link.userId);
    if (!person?.active) throw new HttpProblem(403, 'forbidden', 'Not allowed', 'The person this link was sent to can no longer sign in.');
    const at = await deps.knex.transaction(async (trx) => {
      if (!(await deps.repo.useAckLink(trx, nonce))) throw new HttpProblem(409, 'link-used', 'Link used', 'This acknowledge link has been used already; each link works once.');
      const alert = await trx('alerts').where({ id: link.alertId }).forUpdate().first('state', 'estimator_id', 'rule');
      if (!alert) throw new HttpProblem(404, 'link-invalid', 'Link not valid', 'The alert this link was for no longer exists.');
      if (alert.state !== 'open') throw new HttpProblem(409, 'alert-state', 'Cannot acknowledge', `This alert is ${alert.state}; only an open alert can be acknowledged.`);
      const [row] = await trx('alerts')
        .where({ id: link.alertId })
        .update({ state: 'acknowledged', acknowledged_at: trx.fn.now(), acknowledged_by: person.id })
        .returning('acknowledged_at');
      await trx('alert_events').insert({ alert_id: link.alertId, kind: 'acknowledged', actor_user_id: person.id, note: 'acknowledged from the link in the page e-mail' });
      return { at: new Date(row.acknowledged_at), estimatorId: alert.estimator_id as number | null, rule: alert.rule as string };
    });
    deps.events.emit('alert', { kind: 'acknowledged', alertId: link.alertId, estimatorId: at.estimatorId, unitId: null, rule: at.rule, actor: person.displayName, atMs: deps.clock.now() });
    const body: AcknowledgeLinkResult = { alertId: link.alertId, acknowledgedBy: person.displayName, acknowledgedAt: at.at.toISOString() };
    res.set('Cache-Control', 'no-store').json(body);
  });

  return router;
}

/** The nonce of a token whose signature is good but which has expired (payload is base64url JSON). */
function nonceOf(token: string): string | null {
  try {
    const payload = JSON.parse(Buffer.from(token.split('.')[0], 'base64url').toString('utf8'));
    return typeof payload?.nonce === 'string' ? payload.nonce : typeof payload?.n === 'string' ? payload.n : null;
  } catch {
    return null;
  }
}

// GET /api/events: server-sent events of verdict and alert changes for the dashboard.
import type { AlertChange, VerdictChange } from '../../../shared/src/api/api-types';
import type { AlertEvent, ServiceEvents, VerdictEvent } from '../events';
import { route, type RouteDef } from '../http/route-table';

export function eventsRoutes(events: ServiceEvents, keepAliveMs = 15_000): RouteDef[] {
  return [
    route({
      method: 'get',
      path: '/events',
      ability: 'read',
      tag: 'live',
      summary: 'Server-sent events: `verdict` (VerdictChange) and `alert` (AlertChange); a keep-alive comment every 15 s',
      produces: 'text/event-stream',
      raw: true,
      handler: ({ req, res }) => {
        res.status(200).set({
          'Content-Type': 'text/event-stream',
          'Cache-Control': 'no-store',
          Connection: 'keep-alive',
          'X-Accel-Buffering': 'no',
        });
        res.flushHeaders();
        res.write(': connected\n\n');
        const send = (event: string, data: unknown) => res.write(`event: ${event}\ndata: ${JSON.stringify(data)}\n\n`);
        const onVerdict = (e: VerdictEvent) =>
          send('verdict', { estimatorId: e.estimatorId, verdict: e.verdict, previous: e.previous, at: new Date(e.atMs).toISOString() } satisfies VerdictChange);
        const onAlert = (e: AlertEvent) =>
          send('alert', {
            alertId: e.alertId ?? null,
            kind: e.kind,
            estimatorId: e.estimatorId,
            rule: e.rule,
            severity: e.severity as AlertChange['severity'],
            summary: e.summary,
            at: new Date(e.atMs).toISOString(),
          } satisfies AlertChange);
        events.on('verdict', onVerdict);
        events.on('alert', onAlert);
        const keepAlive = setInterval(() => res.write(': keep-alive\n\n'), keepAliveMs);
        req.on('close', () => {
          clearInterval(keepAlive);
          events.off('verdict', onVerdict);
          events.off('alert', onAlert);
        });
      },
    }),
  ];
}

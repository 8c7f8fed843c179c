// GET /api/events: server-sent events of verdict and alert changes for the dashboard,
// gathered for a quarter of a second and written to every connection together
// (live-broadcaster.ts).
import type { ServiceEvents } from '../events';
import { route, type RouteDef } from '../http/route-table';
import { LiveBroadcaster, type LiveBroadcasterOptions } from './live-broadcaster';

export function eventsRoutes(events: ServiceEvents, options: LiveBroadcasterOptions = {}): RouteDef[] {
  const live = new LiveBroadcaster(events, options);
  return [
    route({
      method: 'get',
      path: '/events',
      ability: 'read',
      tag: 'live',
      summary: 'Server-sent events: `verdict` (VerdictChange) and `alert` (AlertChange), gathered for 250 ms; a keep-alive comment after 15 s without one',
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
        const remove = live.add(res);
        req.on('close', remove);
      },
    }),
  ];
}

// The fleet simulator's command line: `npm run simulate -- --help`.
// By default the Saltmarsh Terminal demo with its fault schedule, until Ctrl-C.
import { CliError, DEMO_UNIT_COUNT, describeFaults, parseCliOptions, usage } from './src/cli-options';
import { ConnectionRefusedError, startFleet, type FleetStats } from './src/publisher';
import { fleetOfSize } from './src/saltmarsh-fleet';

function progress(s: FleetStats): string {
  const parts = [
    `${s.connected}/${s.units} units connected`,
    `${s.generated} samples generated`,
    `${s.published} messages published`,
    `${s.acked} acknowledged`,
  ];
  if (s.refused) parts.push(`${s.refused} units refused`);
  if (s.failed) parts.push(`${s.failed} failed`);
  if (s.withheld) parts.push(`${s.withheld} withheld by faults`);
  if (s.malformed) parts.push(`${s.malformed} malformed`);
  if (s.lostOffline) parts.push(`${s.lostOffline} lost while disconnected`);
  if (s.skipped) parts.push(`${s.skipped} skipped (fell behind)`);
  return `fleet simulator: ${parts.join(', ')}`;
}

function main(): void {
  let options;
  try {
    options = parseCliOptions(process.argv.slice(2), process.env);
  } catch (err) {
    if (!(err instanceof CliError)) throw err;
    console.error(`fleet simulator: ${err.message}\n(npm run simulate -- --help lists the options)`);
    process.exit(2);
  }
  if (options.help) {
    console.log(usage(process.env));
    return;
  }

  const units = fleetOfSize(options.units);
  const reported = new Set<string>();
  const fleet = startFleet({
    url: options.url,
    units,
    rate: options.rate,
    batchSize: options.batchSize,
    faults: options.faults,
    seed: options.seed,
    reference: options.reference,
    time: options.time,
    onError: (unit, err) => {
      // a refusal once per unit; anything else (the broker unreachable, say) once per kind, not per unit and attempt
      const refused = err instanceof ConnectionRefusedError;
      const key = refused ? `${unit}\u0000${err.message}` : err.message;
      if (reported.has(key)) return;
      reported.add(key);
      console.error(`fleet simulator: ${refused ? err.message : `${err.message} (retrying every 2 s)`}`);
    },
  });
  const estimators = units.reduce((n, u) => n + u.estimators.length, 0);
  console.log(
    `fleet simulator: ${units.length} units, ${estimators} estimators, ${options.rate} sample/s each` +
      `${options.batchSize > 1 ? `, batches of ${options.batchSize}` : ''}, publishing to ${options.url}`,
  );
  if (units.length > DEMO_UNIT_COUNT) {
    console.log('fleet simulator: synthetic tractors need device credentials in the database; the demo seed creates none');
  }
  for (const f of describeFaults(options.faults)) console.log(`fleet simulator: fault ${f}`);

  const statsTimer =
    options.statsEveryS > 0 ? setInterval(() => console.log(progress(fleet.stats())), options.statsEveryS * 1000) : undefined;
  statsTimer?.unref();

  let stopping = false;
  const stop = (why: string): void => {
    if (stopping) {
      console.error('fleet simulator: stopping at once');
      process.exit(1);
    }
    stopping = true;
    if (statsTimer) clearInterval(statsTimer);
    console.log(`fleet simulator: ${why}, stopping`);
    fleet.stop({ drainMs: 2000 }).then(
      (s) => {
        console.log(progress(s));
        process.exit(0);
      },
      (err: Error) => {
        console.error(`fleet simulator: ${err.message}`);
        process.exit(1);
      },
    );
  };
  process.on('SIGINT', () => stop('SIGINT'));
  process.on('SIGTERM', () => stop('SIGTERM'));
  if (options.durationS !== undefined) setTimeout(() => stop(`${options.durationS} s elapsed`), options.durationS * 1000);
}

main();

// The Whitecap service: `npm run serve` (npm start runs it for you).
import { shiftedClock } from './src/clock';
import { ConfigError, loadConfig } from './src/config';
import { createLogger } from './src/logger';
import { startService } from './src/server';

async function main(): Promise<void> {
  let config;
  try {
    config = loadConfig();
  } catch (err) {
    if (err instanceof ConfigError) {
      console.error(err.message);
      process.exit(2);
    }
    throw err;
  }
  const logger = createLogger(config.logLevel);
  const service = await startService(config, logger, shiftedClock(config.clockOffsetMs));
  let stopping = false;
  const stop = async (signal: string) => {
    if (stopping) return;
    stopping = true;
    logger.info({ signal }, 'stopping');
    const force = setTimeout(() => process.exit(1), 15_000);
    force.unref();
    await service.stop();
    process.exit(0);
  };
  process.on('SIGINT', () => void stop('SIGINT'));
  process.on('SIGTERM', () => void stop('SIGTERM'));
}

main().catch((err) => {
  console.error(err);
  process.exit(1);
});

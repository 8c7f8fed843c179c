// The local mail catcher for `npm start`: SMTP on WHITECAP_MAIL_CATCHER_SMTP_PORT (default 1025)
// and the captured-mail page on WHITECAP_MAIL_CATCHER_HTTP_PORT (default 8625), both on 127.0.0.1.
// Runs until SIGINT or SIGTERM.
import { MailCatcher } from '../src/dev/mail-catcher';

function port(name: string, fallback: number): number {
  const raw = process.env[name];
  if (raw === undefined || raw === '') return fallback;
  const value = Number(raw);
  if (!Number.isInteger(value) || value < 1 || value > 65535) {
    throw new Error(`${name}=${JSON.stringify(raw)}: must be a port number between 1 and 65535`);
  }
  return value;
}

async function main(): Promise<void> {
  const catcher = await MailCatcher.start({
    host: '127.0.0.1',
    smtpPort: port('WHITECAP_MAIL_CATCHER_SMTP_PORT', 1025),
    httpPort: port('WHITECAP_MAIL_CATCHER_HTTP_PORT', 8625),
  });
  console.log(`mail catcher: SMTP 127.0.0.1:${catcher.smtpPort}, captured mail at ${catcher.viewerUrl}`);

  let stopping = false;
  const stop = () => {
    if (stopping) return;
    stopping = true;
    catcher.stop().then(
      () => process.exit(0),
      (err: unknown) => {
        console.error(err instanceof Error ? err.message : err);
        process.exit(1);
      },
    );
  };
  process.on('SIGINT', stop);
  process.on('SIGTERM', stop);
}

main().catch((err) => {
  console.error(err instanceof Error ? err.message : err);
  process.exit(1);
});

// MQTT over TLS is one setting away: WHITECAP_MQTT_TLS_CERT and WHITECAP_MQTT_TLS_KEY.
import { execFileSync } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { innovationsTopic } from '../../ingest/src/broker/topics';
import { demoDeviceSecret } from '../../ingest/src/demo/saltmarsh';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { connectUnit, endClient, publishAcked } from '../support/mqtt';
import { runCli, startService, type ServiceHandle } from '../support/service';

jest.setTimeout(60_000);

describe('the embedded broker over TLS', () => {
  let db: TestDatabase;
  let service: ServiceHandle;
  let dir: string;

  beforeAll(async () => {
    dir = fs.mkdtempSync(path.join(os.tmpdir(), 'whitecap-tls-'));
    // A self-signed certificate for 127.0.0.1 (openssl from the machine).
    execFileSync('openssl', [
      'req', '-x509', '-newkey', 'rsa:2048', '-nodes', '-days', '1', '-subj', '/CN=127.0.0.1',
      '-addext', 'subjectAltName=IP:127.0.0.1',
      '-keyout', path.join(dir, 'key.pem'), '-out', path.join(dir, 'cert.pem'),
    ], { stdio: 'ignore' });
    db = await createTestDatabase('broker_tls');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    service = await startService({
      WHITECAP_DATABASE_URL: db.url,
      WHITECAP_MQTT_TLS_CERT: path.join(dir, 'cert.pem'),
      WHITECAP_MQTT_TLS_KEY: path.join(dir, 'key.pem'),
    });
  });
  afterAll(async () => {
    await service?.stop();
    await db?.drop();
    fs.rmSync(dir, { recursive: true, force: true });
  });

  it('takes a sample from a unit that connects with mqtts and trusts the certificate', async () => {
    const unit = await connectUnit(service.mqttPort, 'cabinet-01', demoDeviceSecret('cabinet-01'), {
      protocol: 'mqtts',
      ca: fs.readFileSync(path.join(dir, 'cert.pem')),
      servername: '127.0.0.1',
    });
    await publishAcked(unit, innovationsTopic('cabinet-01', 'thermal'), JSON.stringify({ v: 1, seq: 1, t: Date.now(), nu: [0.1], S: [[0.04]] }));
    await endClient(unit);
    const health = await (await fetch(`${service.url}/api/health`)).json();
    expect(health.broker.messagesReceived).toBe(1);
  });

  it('does not speak plain MQTT on that port', async () => {
    await expect(connectUnit(service.mqttPort, 'cabinet-01', demoDeviceSecret('cabinet-01'), { connectTimeout: 2000 })).rejects.toThrow();
  });
});

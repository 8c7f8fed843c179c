// A real MQTT broker (aedes) for the simulator's tests, without the database: it
// accepts the credentials given in WHITECAP_TEST_CREDENTIALS (JSON {username: secret}),
// lets a unit publish only under its own innovations topics (as the service's broker
// does), and writes every accepted message to stdout as one JSON line
// {"unit", "topic", "payload"}. Its first line is {"port": N}. It runs in a child
// process because aedes is an ES module and the jest projects load CommonJS.
import net from 'node:net';
import { Aedes } from 'aedes';

const credentials = JSON.parse(process.env.WHITECAP_TEST_CREDENTIALS ?? '{}');
const unitOf = new WeakMap();
const innovations = /^whitecap\/v1\/units\/([a-z0-9][a-z0-9_-]{0,63})\/estimators\/([a-z0-9][a-z0-9_-]{0,63})\/innovations$/;

const aedes = await Aedes.createBroker({
  authenticate(client, username, password, done) {
    if (username && password && credentials[username] === password.toString('utf8')) {
      unitOf.set(client, username);
      done(null, true);
    } else {
      done(Object.assign(new Error('bad username or password'), { returnCode: 4 }), false);
    }
  },
  authorizePublish(client, packet, done) {
    const m = innovations.exec(packet.topic);
    if (!client || !m || m[1] !== unitOf.get(client)) return done(new Error('not this unit\'s topic'));
    done(null);
  },
});

const out = [];
let scheduled = false;
const flush = () => {
  scheduled = false;
  if (out.length) process.stdout.write(out.join('\n') + '\n');
  out.length = 0;
};
aedes.on('publish', (packet, client) => {
  if (!client) return;
  out.push(JSON.stringify({ unit: unitOf.get(client), topic: packet.topic, payload: packet.payload.toString('utf8') }));
  if (!scheduled) {
    scheduled = true;
    setImmediate(flush);
  }
});

const server = net.createServer(aedes.handle);
server.listen(0, '127.0.0.1', () => {
  process.stdout.write(JSON.stringify({ port: server.address().port }) + '\n');
});
const stop = () => {
  server.close();
  aedes.close(() => {
    flush();
    // exit once everything written has reached the pipe
    process.stdout.write('', () => process.exit(0));
  });
};
process.on('SIGTERM', stop);
process.on('SIGINT', stop);

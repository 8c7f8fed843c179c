// The local mail catcher against real SMTP (nodemailer) and its real viewer over HTTP.
import nodemailer from 'nodemailer';
import { MailCatcher, escapeHtml, linkify } from './mail-catcher';

function transport(catcher: MailCatcher, auth?: { user: string; pass: string }) {
  return nodemailer.createTransport({
    host: '127.0.0.1',
    port: catcher.smtpPort,
    secure: false,
    ignoreTLS: true,
    auth,
    connectionTimeout: 5000,
    greetingTimeout: 5000,
  });
}

describe('MailCatcher', () => {
  let catcher: MailCatcher;

  beforeEach(async () => {
    catcher = await MailCatcher.start({ smtpPort: 0, httpPort: 0 });
  });

  afterEach(async () => {
    await catcher.stop();
  });

  it('listens on loopback only and refuses other hosts', async () => {
    expect(catcher.smtpPort).toBeGreaterThan(0);
    expect(catcher.viewerUrl).toBe(`http://127.0.0.1:${catcher.httpPort}/`);
    await expect(MailCatcher.start({ host: '0.0.0.0' })).rejects.toThrow(/loopback/);
  });

  it('has no viewer unless asked for one', async () => {
    const bare = await MailCatcher.start({});
    try {
      expect(bare.httpPort).toBeNull();
      expect(bare.viewerUrl).toBeNull();
    } finally {
      await bare.stop();
    }
  });

  it('captures mail sent without authentication', async () => {
    await transport(catcher).sendMail({
      from: 'Whitecap <alerts@whitecap.test>',
      to: 'Ana Okafor <ana@saltmarsh.test>, ben@saltmarsh.test',
      subject: 'Unit 7: innovations inconsistent',
      text: 'NIS above the 99% bound for 40 samples.',
    });
    const [mail] = catcher.messages();
    expect(mail).toMatchObject({
      id: 1,
      from: 'alerts@whitecap.test',
      to: ['ana@saltmarsh.test', 'ben@saltmarsh.test'],
      subject: 'Unit 7: innovations inconsistent',
      html: null,
      authUser: null,
    });
    expect(mail!.text.trim()).toBe('NIS above the 99% bound for 40 samples.');
    expect(mail!.headers['subject']).toBe('Unit 7: innovations inconsistent');
    expect(mail!.headers['to']).toContain('ana@saltmarsh.test');
    expect(Date.parse(mail!.receivedAt)).not.toBeNaN();
  });

  it('accepts any username and password (AUTH PLAIN and LOGIN)', async () => {
    for (const authMethod of ['PLAIN', 'LOGIN']) {
      const t = nodemailer.createTransport({
        host: '127.0.0.1',
        port: catcher.smtpPort,
        secure: false,
        ignoreTLS: true,
        authMethod,
        auth: { user: `relay-${authMethod}`, pass: 'whatever' },
      });
      await t.sendMail({ from: 'alerts@whitecap.test', to: 'ops@saltmarsh.test', subject: `via ${authMethod}`, text: 'x' });
    }
    expect(catcher.messages().map((m) => [m.subject, m.authUser])).toEqual([
      ['via PLAIN', 'relay-PLAIN'],
      ['via LOGIN', 'relay-LOGIN'],
    ]);
  });

  it('records the envelope recipients, Bcc included, and decodes an encoded subject', async () => {
    await transport(catcher).sendMail({
      from: 'alerts@whitecap.test',
      to: 'ana@saltmarsh.test',
      bcc: 'lead@saltmarsh.test',
      subject: 'Σ drift — unit 3',
      text: 'x',
      html: '<p>x</p>',
    });
    const [mail] = catcher.messages();
    expect(mail!.to).toEqual(['ana@saltmarsh.test', 'lead@saltmarsh.test']);
    expect(mail!.subject).toBe('Σ drift — unit 3');
    expect(mail!.headers['subject']).toBe('Σ drift — unit 3');
    expect(mail!.html).toContain('<p>x</p>');
  });

  it('waitFor resolves with a message that is already there or still to come', async () => {
    const t = transport(catcher);
    await t.sendMail({ from: 'a@whitecap.test', to: 'x@saltmarsh.test', subject: 'first', text: '1' });
    await expect(catcher.waitFor((m) => m.subject === 'first')).resolves.toMatchObject({ subject: 'first' });

    const later = catcher.waitFor((m) => m.to.includes('y@saltmarsh.test'), 5000);
    await t.sendMail({ from: 'a@whitecap.test', to: 'x@saltmarsh.test', subject: 'not this', text: '2' });
    await t.sendMail({ from: 'a@whitecap.test', to: 'y@saltmarsh.test', subject: 'this one', text: '3' });
    await expect(later).resolves.toMatchObject({ subject: 'this one', id: 3 });

    await expect(catcher.waitFor((m) => m.subject === 'never', 50)).rejects.toThrow(/no matching message within 50 ms/);
  });

  it('keeps at most maxMessages, dropping the oldest', async () => {
    const small = await MailCatcher.start({ maxMessages: 2 });
    try {
      const t = transport(small);
      for (const subject of ['one', 'two', 'three']) {
        await t.sendMail({ from: 'a@whitecap.test', to: 'x@saltmarsh.test', subject, text: subject });
      }
      expect(small.messages().map((m) => [m.id, m.subject])).toEqual([
        [2, 'two'],
        [3, 'three'],
      ]);
      small.clear();
      expect(small.messages()).toEqual([]);
    } finally {
      await small.stop();
    }
  });

  it('setDown refuses connections with 421 until it is lifted', async () => {
    const t = transport(catcher);
    catcher.setDown(true);
    const err = await t
      .sendMail({ from: 'a@whitecap.test', to: 'x@saltmarsh.test', subject: 'refused', text: 'x' })
      .then(() => null, (e: unknown) => e as Error & { responseCode?: number; response?: string });
    expect(err).not.toBeNull();
    expect(err!.responseCode).toBe(421);
    expect(catcher.messages()).toHaveLength(0);

    catcher.setDown(false);
    await t.sendMail({ from: 'a@whitecap.test', to: 'x@saltmarsh.test', subject: 'accepted', text: 'x' });
    expect(catcher.messages().map((m) => m.subject)).toEqual(['accepted']);
  });

  describe('viewer', () => {
    const get = (path: string, init?: RequestInit) => fetch(new URL(path, catcher.viewerUrl!), init);

    it('lists messages newest first, escaping what the mail says', async () => {
      const t = transport(catcher);
      await t.sendMail({ from: 'a@whitecap.test', to: 'x@saltmarsh.test', subject: 'older', text: 'x' });
      await t.sendMail({ from: 'a@whitecap.test', to: 'x@saltmarsh.test', subject: '<script>alert(1)</script> & co', text: 'x' });

      const res = await get('/');
      expect(res.status).toBe(200);
      expect(res.headers.get('content-type')).toMatch(/^text\/html/);
      expect(res.headers.get('content-security-policy')).toContain("default-src 'none'");
      const html = await res.text();
      expect(html).toContain('<title>Whitecap · captured mail</title>');
      expect(html).toContain('local stand-in for a mail relay');
      expect(html).not.toContain('<script>');
      expect(html).toContain('&lt;script&gt;alert(1)&lt;/script&gt; &amp; co');
      expect(html.indexOf('&lt;script&gt;')).toBeLessThan(html.indexOf('older'));
      expect(html).toContain('href="/messages/2"');
    });

    it('shows one message with its text linkified and its HTML sandboxed', async () => {
      await transport(catcher).sendMail({
        from: 'alerts@whitecap.test',
        to: 'ana@saltmarsh.test',
        subject: 'Acknowledge <b>now</b>',
        text: 'Acknowledge: http://127.0.0.1:8610/ack?t=abc&u=1.\nNot a link: <img src=x onerror=alert(1)>',
        html: '<p>Hello</p><script>alert(2)</script>',
      });
      const res = await get('/messages/1');
      expect(res.status).toBe(200);
      const html = await res.text();
      expect(html).toContain(
        '<a href="http://127.0.0.1:8610/ack?t=abc&amp;u=1" rel="noreferrer noopener" target="_blank">http://127.0.0.1:8610/ack?t=abc&amp;u=1</a>.',
      );
      expect(html).toContain('&lt;img src=x onerror=alert(1)&gt;');
      expect(html).toContain('Acknowledge &lt;b&gt;now&lt;/b&gt;');
      expect(html).not.toMatch(/<script>/);
      const iframe = /<iframe [^>]*>/.exec(html)?.[0] ?? '';
      expect(iframe).toMatch(/sandbox="[^"]*"/);
      expect(iframe).not.toContain('allow-scripts');
      expect(iframe).not.toContain('allow-same-origin');
      expect(iframe).toContain('srcdoc="&lt;base target=&quot;_blank&quot;&gt;&lt;p&gt;Hello&lt;/p&gt;');

      expect((await get('/messages/99')).status).toBe(404);
    });

    it('serves JSON and clears on DELETE', async () => {
      await transport(catcher).sendMail({ from: 'a@whitecap.test', to: 'x@saltmarsh.test', subject: 'json', text: 'body' });

      const list = await get('/api/messages');
      expect(list.headers.get('content-type')).toMatch(/^application\/json/);
      const all = (await list.json()) as { id: number; subject: string }[];
      expect(all).toHaveLength(1);
      expect(all[0]).toMatchObject({ id: 1, subject: 'json', to: ['x@saltmarsh.test'] });

      const one = await get('/api/messages/1');
      expect(await one.json()).toMatchObject({ id: 1, subject: 'json' });
      expect((await get('/api/messages/2')).status).toBe(404);
      expect((await get('/api/messages/1', { method: 'DELETE' })).status).toBe(405);

      expect((await get('/api/messages', { method: 'DELETE' })).status).toBe(204);
      expect(catcher.messages()).toEqual([]);
      expect(await (await get('/api/messages')).json()).toEqual([]);
    });
  });
});

describe('linkify', () => {
  it('escapes first and links only http(s) URLs, stopping at quotes and brackets', () => {
    expect(linkify('see "https://a.test/x?y=1" <now>')).toBe(
      'see &quot;<a href="https://a.test/x?y=1" rel="noreferrer noopener" target="_blank">https://a.test/x?y=1</a>&quot; &lt;now&gt;',
    );
    expect(linkify('javascript:alert(1) ftp://x')).toBe(escapeHtml('javascript:alert(1) ftp://x'));
    expect(linkify('(http://b.test/p).')).toBe('(<a href="http://b.test/p" rel="noreferrer noopener" target="_blank">http://b.test/p</a>).');
  });
});

import { escapeHtml, evidenceLine, groupedMail, handoffMail, pageMail, resolutionMail, type MailAlert } from './mail-templates';
import { StormGrouper, type PendingNotification } from './storm-grouping';

const ctx = { baseUrl: 'https://whitecap.saltmarsh.example/' };
const opened = Date.parse('2026-01-01T03:00:00Z');
const ack = { url: 'https://whitecap.saltmarsh.example/ack?token=abc.def', expiresAtMs: opened + 86_400_000 };

const alert: MailAlert = {
  id: 42,
  severity: 'critical',
  rule: 'nis-window',
  unitKey: 'tractor-07',
  estimatorKey: 'position',
  siteName: 'Saltmarsh Terminal',
  designRevision: 'tractor-planar r5',
  summary: 'NIS window above its band',
  evidence: { check: 'nis', ready: true, verdict: 'inconsistent', samples: 100, statistic: 312.4567, dof: 200, bounds: { lower: 161.82, upper: 241.06 }, average: 3.124567 },
  openedAtMs: opened,
};

const hostile = '<script>alert("x")</script> & \'friends\'';
const escapedHostile = '&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt; &amp; &#39;friends&#39;';

describe('escapeHtml and evidenceLine', () => {
  it('escapes the five characters HTML gives meaning to', () => {
    expect(escapeHtml(hostile)).toBe(escapedHostile);
    expect(escapeHtml(5)).toBe('5');
  });

  it('puts the evidence on one line, numbers to 4 significant digits, intervals as [lower, upper]', () => {
    expect(evidenceLine(alert.evidence as Record<string, unknown>)).toBe('samples=100, statistic=312.5, dof=200, bounds=[161.8, 241.1], average=3.125');
    expect(evidenceLine({ note: 'a\nb' })).toBe('note=a b');
    expect(evidenceLine({})).toBe('see the alert');
    expect(evidenceLine({ text: 'x'.repeat(500) }, 50)).toHaveLength(50);
  });
});

describe('pageMail', () => {
  it('says what fired, where, the evidence, and links to the alert and to acknowledge', () => {
    const m = pageMail(ctx, alert, ack);
    expect(m.subject).toBe('[Whitecap] CRITICAL nis-window on tractor-07/position');
    expect(m.text).toContain('NIS window above its band');
    expect(m.text).toContain('tractor-07/position');
    expect(m.text).toMatch(/Evidence: +samples=100, statistic=312\.5, dof=200, bounds=\[161\.8, 241\.1\], average=3\.125\n/);
    expect(m.text).toContain('Opened:           2026-01-01 03:00 UTC');
    expect(m.text).toContain('Open the alert: https://whitecap.saltmarsh.example/alerts/42\n');
    expect(m.text).toContain(`\n${ack.url}\n`);
    expect(m.text).toContain('until 2026-01-02 03:00 UTC');
    expect(m.html).toContain('href="https://whitecap.saltmarsh.example/alerts/42"');
    expect(m.html).toContain('href="https://whitecap.saltmarsh.example/ack?token=abc.def"');
    expect(m.html).toContain('>CRITICAL</span>'); // severity in words, not colour alone
  });

  it('shows times in the rota zone when given (Europe/London is UTC+1 in summer, IANA tz database)', () => {
    const m = pageMail({ ...ctx, timeZone: 'Europe/London' }, { ...alert, openedAtMs: Date.parse('2026-07-01T12:00:00Z') }, ack);
    expect(m.text).toContain('2026-07-01 13:00 Europe/London (UTC+01:00)');
  });

  it('escapes everything it puts in the HTML and keeps the subject on one line', () => {
    const m = pageMail(ctx, { ...alert, summary: hostile, unitKey: 'tractor-<b>07</b>', siteName: 'Quay "North"', evidence: hostile }, ack);
    expect(m.html).not.toContain('<script>');
    expect(m.html).not.toContain('<b>07</b>');
    expect(m.html).toContain(escapedHostile);
    expect(m.html).toContain('tractor-&lt;b&gt;07&lt;/b&gt;/position');
    expect(m.html).toContain('Quay &quot;North&quot;');
    const injected = pageMail(ctx, { ...alert, unitKey: 'tractor-07\r\nBcc: someone@example.org' }, ack);
    expect(injected.subject).toBe('[Whitecap] CRITICAL nis-window on tractor-07 Bcc: someone@example.org/position');
    expect(injected.subject).not.toMatch(/[\r\n]/);
  });
});

describe('groupedMail', () => {
  function storm(): { summary: ReturnType<StormGrouper['due']>[number] } {
    const g = new StormGrouper({ listLimit: 3 });
    const base: PendingNotification = {
      recipientUserId: 5,
      alertId: 0,
      severity: 'warning',
      rule: 'bias',
      unitKey: 'tractor-00',
      estimatorKey: 'position',
      siteName: 'Quay North',
      designRevision: 'tractor-planar r5',
      summary: 'bias in east',
      openedAtMs: opened,
    };
    for (let i = 0; i <= 6; i++) {
      g.add({ ...base, alertId: 100 + i, unitKey: `tractor-0${i}`, severity: i === 3 ? 'critical' : 'warning', designRevision: i >= 5 ? null : base.designRevision, summary: i === 6 ? hostile : base.summary, siteName: i === 4 ? 'Quay <South>' : base.siteName }, opened + i * 1000);
    }
    return { summary: g.due(opened + 180_000)[0] };
  }

  it('summarises the window by severity, site and design revision, lists the first alerts and says how many more', () => {
    const { summary: msg } = storm();
    if (msg.kind !== 'grouped') throw new Error('expected grouped');
    const m = groupedMail(ctx, msg.summary, msg);
    // Held: alerts 101…106 (100 went out alone): 1 critical (103), 5 warning.
    expect(m.subject).toBe('[Whitecap] 6 alerts in 3 minutes: 1 critical, 5 warning');
    expect(m.text).toMatch(/By site: +Quay North: 5, Quay <South>: 1\n/);
    expect(m.text).toMatch(/By design revision: +tractor-planar r5: 4, no known design revision: 2\n/);
    expect(m.text).toContain('- CRITICAL bias on tractor-03/position (Quay North): bias in east\n  https://whitecap.saltmarsh.example/alerts/103');
    expect(m.text.match(/^- /gm)).toHaveLength(3);
    expect(m.text).toContain('and 3 more in the inbox: https://whitecap.saltmarsh.example/alerts');
    expect(m.html).toContain('Quay &lt;South&gt;: 1');
    expect(m.html).toContain('and 3 more');
  });

  it('escapes a summary carrying <script>', () => {
    const { summary: msg } = storm();
    if (msg.kind !== 'grouped') throw new Error('expected grouped');
    const m = groupedMail(ctx, { ...msg.summary, alerts: msg.summary.alerts.map((a) => ({ ...a, summary: hostile })) }, msg);
    expect(m.html).not.toMatch(/<script/i);
    expect(m.html).toContain(escapedHostile);
    expect(m.text).toContain(hostile); // plain text carries it as text
  });
});

describe('handoffMail', () => {
  it('says who did not acknowledge and for how long, with a fresh acknowledge link', () => {
    const m = handoffMail(ctx, alert, { notAcknowledgedBy: ['Ada Quay', 'Ben <Crane>'], waitedMs: 600_000, ack });
    expect(m.subject).toBe('[Whitecap] Handed to you: CRITICAL nis-window on tractor-07/position');
    expect(m.text).toContain('Not acknowledged by Ada Quay, then Ben <Crane> within 10 minutes, so it is handed to you.');
    expect(m.text).toContain(ack.url);
    expect(m.html).toContain('Ben &lt;Crane&gt;');
    expect(m.html).not.toContain('<Crane>');
  });
});

describe('resolutionMail', () => {
  it('says who resolved it, when, and the note', () => {
    const m = resolutionMail(ctx, alert, { resolvedBy: 'Ada Quay', resolvedAtMs: opened + 3_600_000, note: 'antenna re-seated <ok>' });
    expect(m.subject).toBe('[Whitecap] Resolved: CRITICAL nis-window on tractor-07/position');
    expect(m.text).toMatch(/Resolved: +2026-01-01 04:00 UTC\n/);
    expect(m.text).toMatch(/By: +Ada Quay\n/);
    expect(m.text).toContain('antenna re-seated <ok>');
    expect(m.html).toContain('antenna re-seated &lt;ok&gt;');
    expect(m.text).toContain('https://whitecap.saltmarsh.example/alerts/42');
  });

  it('names Whitecap when the alert closed by itself', () => {
    const m = resolutionMail(ctx, alert, { resolvedBy: null, resolvedAtMs: opened });
    expect(m.text).toMatch(/By: +Whitecap, after the condition cleared/);
  });
});

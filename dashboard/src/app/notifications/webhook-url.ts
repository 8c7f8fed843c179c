/**
 * Whether a webhook URL may be registered: HTTPS, or plain HTTP only to a receiver on this
 * machine (loopback), where the call never crosses a network. Returns what is wrong, in
 * words, or null when the URL is acceptable. The service checks the same rule again.
 */
export function webhookUrlProblem(text: string): string | null {
  const raw = text.trim();
  if (!raw) return 'Enter the address of the receiver, starting with https://.';
  let url: URL;
  try {
    url = new URL(raw);
  } catch {
    return 'That is not a complete address. Enter it with its scheme, e.g. https://hooks.example.org/whitecap.';
  }
  if (url.protocol !== 'https:' && url.protocol !== 'http:') return 'Only https:// addresses can receive webhooks.';
  if (!url.hostname) return 'The address needs a host name.';
  if (url.username || url.password) return 'Leave user names and passwords out of the address; Whitecap signs each call instead.';
  if (url.protocol === 'http:' && !isLoopbackHost(url.hostname)) {
    return 'Use https://. Plain http:// is accepted only for a receiver on this machine (127.0.0.1, ::1 or localhost), because the calls would otherwise cross the network unencrypted.';
  }
  return null;
}

/** 127.0.0.0/8, ::1 or localhost. */
export function isLoopbackHost(hostname: string): boolean {
  const h = hostname.toLowerCase().replace(/^\[|\]$/g, '');
  return h === 'localhost' || h === '::1' || /^127(\.\d{1,3}){3}$/.test(h);
}

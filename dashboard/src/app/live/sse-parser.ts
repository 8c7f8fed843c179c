// A parser for the server-sent events wire format, as the WHATWG HTML standard
// ("Server-sent events", the event stream interpretation) describes it: lines end in
// CRLF, LF or CR; a blank line dispatches the event; ":" starts a comment; fields are
// event, data (joined with newlines), id and retry. Text arrives in arbitrary chunks.

export interface SseMessage {
  /** The `event:` field, or "message" when there was none. */
  event: string;
  data: string;
  /** The last event id seen so far, if any. */
  id: string | null;
}

export class SseParser {
  private buffer = '';
  /** A CR ended the last chunk: a LF starting the next one belongs to it. */
  private pendingCr = false;
  private eventType = '';
  private data: string[] = [];
  private lastEventId: string | null = null;
  /** The reconnection time the server asked for with `retry:`, in ms. */
  retryMs: number | null = null;

  /** Feeds a chunk of decoded text; returns the events it completed. */
  push(chunk: string): SseMessage[] {
    let text = chunk;
    if (this.pendingCr && text.startsWith('\n')) text = text.slice(1);
    this.pendingCr = false;
    this.buffer += text;
    const out: SseMessage[] = [];
    let start = 0;
    for (let i = 0; i < this.buffer.length; i++) {
      const c = this.buffer[i];
      if (c !== '\n' && c !== '\r') continue;
      const line = this.buffer.slice(start, i);
      if (c === '\r') {
        if (i + 1 < this.buffer.length) {
          if (this.buffer[i + 1] === '\n') i++;
        } else {
          this.pendingCr = true;
        }
      }
      start = i + 1;
      const message = this.line(line);
      if (message) out.push(message);
    }
    this.buffer = this.buffer.slice(start);
    return out;
  }

  private line(line: string): SseMessage | null {
    if (line === '') return this.dispatch();
    if (line.startsWith(':')) return null;
    const colon = line.indexOf(':');
    const field = colon < 0 ? line : line.slice(0, colon);
    let value = colon < 0 ? '' : line.slice(colon + 1);
    if (value.startsWith(' ')) value = value.slice(1);
    switch (field) {
      case 'event':
        this.eventType = value;
        break;
      case 'data':
        this.data.push(value);
        break;
      case 'id':
        if (!value.includes('\0')) this.lastEventId = value;
        break;
      case 'retry':
        if (/^\d+$/.test(value)) this.retryMs = Number(value);
        break;
    }
    return null;
  }

  private dispatch(): SseMessage | null {
    const type = this.eventType || 'message';
    const data = this.data;
    this.eventType = '';
    this.data = [];
    if (data.length === 0) return null;
    return { event: type, data: data.join('\n'), id: this.lastEventId };
  }
}

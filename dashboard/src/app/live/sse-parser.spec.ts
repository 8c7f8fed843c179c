import { SseParser } from './sse-parser';

describe('SseParser', () => {
  it('parses named events with JSON data and skips keep-alive comments', () => {
    const parser = new SseParser();
    const out = parser.push(
      ': keep-alive\n\nevent: verdict\ndata: {"estimatorId":7,"verdict":"marginal"}\n\nevent: alert\ndata: {"alertId":3}\n\n',
    );
    expect(out).toEqual([
      { event: 'verdict', data: '{"estimatorId":7,"verdict":"marginal"}', id: null },
      { event: 'alert', data: '{"alertId":3}', id: null },
    ]);
  });

  it('joins events split across chunks at any point, including between CR and LF', () => {
    const parser = new SseParser();
    const wire = 'event: alert\r\ndata: {"a":\r\ndata: 1}\r\n\r\nid: 9\ndata: x\r\r';
    const seen = [];
    for (const ch of wire) seen.push(...parser.push(ch));
    expect(seen).toEqual([
      { event: 'alert', data: '{"a":\n1}', id: null },
      { event: 'message', data: 'x', id: '9' },
    ]);
  });

  it('keeps an unfinished event until its blank line arrives, and reads retry', () => {
    const parser = new SseParser();
    expect(parser.push('retry: 2500\nevent: verdict\ndata: {}')).toEqual([]);
    expect(parser.retryMs).toBe(2500);
    expect(parser.push('\n\n')).toEqual([{ event: 'verdict', data: '{}', id: null }]);
  });

  it('dispatches nothing for an event without data and takes a field without a colon as empty', () => {
    const parser = new SseParser();
    expect(parser.push('event: verdict\n\ndata\n\n')).toEqual([{ event: 'message', data: '', id: null }]);
  });
});

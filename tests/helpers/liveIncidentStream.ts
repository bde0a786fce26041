/**
 * The incident events of a live-event stream (`GET /v1/events`, server-sent events) as they arrive: `seen` holds them
 * in order, and `next(pred)` resolves with the first one, seen or coming, that matches, or fails after `waitMs`.
 */
// eslint-disable-next-line @typescript-eslint/no-explicit-any
type Json = Record<string, any>;

export function incidentEventStream(body: ReadableStream<Uint8Array>, waitMs: number) {
  const seen: Json[] = [];
  const waiters: { pred: (e: Json) => boolean; resolve: (e: Json) => void }[] = [];
  const reader = body.getReader();
  const decoder = new TextDecoder();
  let text = '';
  void (async () => {
    for (;;) {
      const { value, done } = await reader.read().catch(() => ({ value: undefined, done: true }));
      if (done) return;
      text += decoder.decode(value, { stream: true });
      let end: number;
      while ((end = text.indexOf('\n\n')) >= 0) {
        const block = text.slice(0, end);
        text = text.slice(end + 2);
        const fields = Object.fromEntries(block.split('\n').filter((l) => !l.startsWith(':') && l.includes(': ')).map((l) => [l.slice(0, l.indexOf(': ')), l.slice(l.indexOf(': ') + 2)]));
        if (fields.event !== 'incident') continue;
        const event = JSON.parse(fields.data!) as Json;
        seen.push(event);
        for (const w of [...waiters]) {
          if (!w.pred(event)) continue;
          waiters.splice(waiters.indexOf(w), 1);
          w.resolve(event);
        }
      }
    }
  })();
  return {
    seen,
    next(pred: (e: Json) => boolean): Promise<Json> {
      const already = seen.find(pred);
      if (already) return Promise.resolve(already);
      return new Promise((resolve, reject) => {
        const timer = setTimeout(() => reject(new Error(`no matching live event; saw ${JSON.stringify(seen.map((e) => [e.incidentId, e.change, e.severity, e.state]))}`)), waitMs);
        waiters.push({ pred, resolve: (e) => (clearTimeout(timer), resolve(e)) });
      });
    },
    close: () => reader.cancel(),
  };
}

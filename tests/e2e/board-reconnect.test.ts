/**
 * The board's live feed behind a reverse proxy, in Chromium: while the server restarts the proxy answers 502 and the
 * browser's EventSource gives up for good; a server with too many clients answers 503. The board checks the session,
 * says that its view is as of its last load, reconnects once the server is back and reloads what it missed; only a
 * token the server no longer accepts makes it ask to sign in again.
 */
import { createServer, request, type IncomingMessage, type Server, type ServerResponse } from 'node:http';
import type { AddressInfo } from 'node:net';
import type { Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { HAVE_CHROMIUM, launchBoardBrowser, poll, signIn, type BoardBrowser } from './boardBrowser.ts';
import { SAMPLE_DOUBT, startBoardFixture, TOKENS, type BoardFixture } from './boardFixture.ts';

/** What the proxy answers: everything passed on, 502 to everything (upstream down), or one status to one path. */
type ProxyMode = { kind: 'up' } | { kind: 'down' } | { kind: 'answer'; path: string; status: number; otherwise: 'up' | 'down' };

/** A minimal reverse proxy, as nginx would be in front of the API: 502 Bad Gateway while the upstream is down. */
function startProxy(upstream: URL) {
  let mode: ProxyMode = { kind: 'up' };
  const open = new Set<ServerResponse>();
  const server: Server = createServer((req: IncomingMessage, res: ServerResponse) => {
    const path = new URL(req.url ?? '/', 'http://proxy').pathname;
    const passOn = mode.kind === 'up' || (mode.kind === 'answer' && path !== mode.path && mode.otherwise === 'up');
    if (mode.kind === 'answer' && path === mode.path) {
      res.writeHead(mode.status, { 'content-type': 'application/json' }).end(JSON.stringify({ error: 'refused', message: `answered ${mode.status} by the test's proxy` }));
      return;
    }
    if (!passOn) {
      res.writeHead(502, { 'content-type': 'text/html' }).end('<h1>502 Bad Gateway</h1>');
      return;
    }
    const up = request({ host: upstream.hostname, port: upstream.port, path: req.url, method: req.method, headers: req.headers }, (answer) => {
      res.writeHead(answer.statusCode ?? 502, answer.headers);
      answer.pipe(res);
    });
    up.on('error', () => (res.headersSent ? res.destroy() : res.writeHead(502).end()));
    open.add(res);
    res.on('close', () => {
      open.delete(res);
      up.destroy();
    });
    req.pipe(up);
  });
  return {
    server,
    /** Sets what the proxy answers from now on; a restart also cuts the connections open now (the event stream). */
    set(next: ProxyMode, cut = false) {
      mode = next;
      if (cut) for (const res of open) res.destroy();
    },
  };
}

describe.skipIf(!HAVE_CHROMIUM)('board live feed through a restart behind a proxy', () => {
  let fixture: BoardFixture;
  let browser: BoardBrowser;
  let proxy: ReturnType<typeof startProxy>;
  let url: string;
  let page: Page;
  const live = () => page.locator('#live');

  beforeAll(async () => {
    fixture = await startBoardFixture([['PS2-P3', 'gearbox']]);
    expect(await fixture.feed('PS2-P3', 'gearbox')).toBeGreaterThan(0);
    expect(await fixture.feed(SAMPLE_DOUBT.unit, SAMPLE_DOUBT.component)).toBeGreaterThan(0);
    proxy = startProxy(new URL(fixture.url));
    await new Promise<void>((resolve) => proxy.server.listen(0, '127.0.0.1', resolve));
    url = `http://127.0.0.1:${(proxy.server.address() as AddressInfo).port}/`;
    browser = await launchBoardBrowser();
    page = await browser.open();
  });

  afterAll(async () => {
    await browser?.close();
    proxy?.server.closeAllConnections();
    await new Promise((resolve) => proxy?.server.close(resolve));
    await fixture?.close();
  });

  /** Waits until the header says the board will try again (or, wrongly, that the token is refused) and returns what it says. */
  const settledOutage = async () => {
    await poll(() => live().innerText()).toMatch(/trying again|sign in again/);
    return live().innerText();
  };

  it('reconnects after the proxy answered 502, says meanwhile since when the view is stale, and hears changes again', async () => {
    await signIn(page, url, TOKENS.responder, 'R. Tanaka');
    await page.locator('#incidents > li.incident').first().waitFor();
    proxy.set({ kind: 'down' }, true);
    const during = await settledOutage();
    expect(during).not.toContain('sign in again');
    expect(during).toMatch(/not connected/);
    // Since when: the time of the last completed load, in the board's one time format.
    expect(during).toMatch(/as of \d{4}-\d\d-\d\dT\d\d:\d\dZ/);
    expect(await live().getAttribute('data-live')).toBe('lost');

    proxy.set({ kind: 'up' });
    await poll(() => live().getAttribute('data-live')).toBe('on');
    // The stream works again: an acknowledgement made elsewhere reaches the card without a reload of the page.
    const listed = (await fixture.app.inject({ url: '/v1/incidents?state=open&unit=PS2-P3', headers: { authorization: `Bearer ${TOKENS.viewer}` } })).json();
    const id: string = listed.incidents[0].id;
    const ack = await fixture.app.inject({ method: 'POST', url: `/v1/incidents/${encodeURIComponent(id)}/ack`, headers: { authorization: `Bearer ${TOKENS.responder}` }, payload: { by: 'A. Engineer' } });
    expect(ack.statusCode).toBe(200);
    await poll(() => page.locator(`#incidents > li.incident[data-incident="${id}"]`).getAttribute('data-acknowledged')).toBe('true');
  });

  it('reconnects after a 503 "too many clients" on the event stream', async () => {
    proxy.set({ kind: 'answer', path: '/v1/events', status: 503, otherwise: 'up' }, true);
    const during = await settledOutage();
    expect(during).not.toContain('sign in again');
    proxy.set({ kind: 'up' });
    await poll(() => live().getAttribute('data-live')).toBe('on');
  });

  it('asks to sign in again only when the server refuses the token', async () => {
    proxy.set({ kind: 'answer', path: '/v1/session', status: 401, otherwise: 'down' }, true);
    await poll(() => live().innerText()).toContain('sign in again');
    expect(browser.problems).toEqual([]);
  });
});

/**
 * A board of more open incidents than one page of the API, in Chromium: every one is shown, the longest waiting
 * first (the API's first page would hold the most recently opened), and the charts load as their cards come near
 * the window, a few at a time, so that an acknowledgement does not queue behind hundreds of chart requests.
 */
import type { Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { HAVE_CHROMIUM, launchBoardBrowser, poll, signIn, type BoardBrowser } from './boardBrowser.ts';
import { sampleInDoubtHistory, startBoardFixture, TOKENS, type BoardFixture } from './boardFixture.ts';

/** More than the 500 the board used to ask for in one page. */
const UNITS = 520;
/** The loads the board runs at once at most (src/board/whenSeen.js). */
const MOST_CHARTS_AT_ONCE = 4;

describe.skipIf(!HAVE_CHROMIUM)('board of many open incidents in Chromium', () => {
  let fixture: BoardFixture;
  let browser: BoardBrowser;
  let page: Page;
  const charts = { started: 0, inFlight: 0, most: 0 };

  beforeAll(async () => {
    fixture = await startBoardFixture([]);
    // Invented units, each opening one incident a day after the one before: unit 0 has waited longest.
    for (let n = 0; n < UNITS; n += 1) expect(await fixture.feedSamples(sampleInDoubtHistory(`TU${String(n).padStart(3, '0')}`, n))).toBeGreaterThan(0);
    browser = await launchBoardBrowser();
    page = await browser.open();
    const isChart = (u: string) => u.includes('/chart.svg');
    page.on('request', (r) => {
      if (!isChart(r.url())) return;
      charts.started += 1;
      charts.inFlight += 1;
      charts.most = Math.max(charts.most, charts.inFlight);
    });
    const done = (r: { url(): string }) => {
      if (isChart(r.url())) charts.inFlight -= 1;
    };
    page.on('requestfinished', done);
    page.on('requestfailed', done);
  }, 600_000);

  afterAll(async () => {
    await browser?.close();
    await fixture?.close();
  });

  it('shows every open incident, the longest waiting first, and says of none that it is left out', async () => {
    const total = (await fixture.app.inject({ url: '/v1/incidents?state=open&limit=1', headers: { authorization: `Bearer ${TOKENS.viewer}` } })).json().total;
    expect(total).toBe(UNITS);
    await signIn(page, fixture.url, TOKENS.responder, 'R. Tanaka');
    await poll(() => page.locator('#incidents > li.incident').count()).toBe(UNITS);
    expect(await page.locator('#incidents > li.incident').first().getAttribute('data-incident')).toMatch(/^TU000\//);
    expect(await page.locator('#incidents > li.incident').last().getAttribute('data-incident')).toMatch(new RegExp(`^TU${UNITS - 1}/`));
    expect(await page.locator('#more-incidents').isHidden()).toBe(true);
  });

  it('loads the charts of the cards near the window only, a few at a time, and an acknowledgement goes through meanwhile', async () => {
    const first = page.locator('#incidents > li.incident').first();
    await first.locator('.chart svg').waitFor({ timeout: 120_000 });
    const ack = first.locator('button[data-action="ack"]');
    await ack.click();
    await poll(() => first.locator('.action-status').getAttribute('data-kind')).toBe('done');
    await poll(() => charts.inFlight).toBe(0);
    expect(charts.most).toBeLessThanOrEqual(MOST_CHARTS_AT_ONCE);
    // A window of 900 px and a margin show a handful of cards, not hundreds.
    expect(charts.started).toBeGreaterThan(0);
    expect(charts.started).toBeLessThan(60);
    // Scrolled to the end, the last card's chart is drawn.
    const last = page.locator('#incidents > li.incident').last();
    await last.scrollIntoViewIfNeeded();
    await last.locator('.chart svg').waitFor({ timeout: 120_000 });
    expect(charts.started).toBeLessThan(UNITS / 2);
    expect(browser.problems).toEqual([]);
  });
});

/**
 * What an incident card says, as a user sees it in Debian's Chromium (driven by playwright-core), against a real
 * `wearshift serve` process (queue workers and HTTP API in one) on a private redis-server, every result posted to
 * `POST /v1/results` and judged by the worker:
 * - an incident a corrected result withdraws shows no current evidence: its findings are listed apart, in italics,
 *   as no longer holding, and its state line says how it was closed;
 * - a sampling fault of the whole sample (unit hours going back, the same bottle sent twice) is about the sample,
 *   not the metal it is filed under: no metal named, no chart asked for, a note saying why instead;
 * - advisory findings of the incident's sample are listed under a heading of their own, apart from the evidence;
 * - an incident closed on its return to normal and reopened names the sample it returned at, and its
 *   acknowledgement is withdrawn;
 * and the caution stays on every page. Every wait is for a state of the page or of the API, bounded generously.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startWearshift, stopAll, waitFor, type WearshiftProcess } from '../helpers/processes.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { HAVE_CHROMIUM, launchBoardBrowser, poll, signIn, type BoardBrowser } from './boardBrowser.ts';

if (!HAVE_CHROMIUM) console.warn('board card display e2e skipped: no Chromium at /usr/bin/chromium (apt-get install -y chromium; CI installs it)');

/** Bounds for a shared, busy machine: generous, and only ever reached when something is broken. */
const WAIT_MS = 180_000;
const TOKENS = { ingest: 'card-ingest-token-4e1a', viewer: 'card-viewer-token-8b2c', responder: 'card-responder-token-0d7f' };
const ADVISORY_HEADING = 'Also on this sample (advisory, opens no incident)';
const WHOLE_SAMPLE_NOTE = 'A fault of the whole sample: no measurand to chart (every trend is on the component page).';

/** Invented engines with an iron limit, and invented gearboxes whose group has population limits on copper. */
const CONFIG = `
detection: { measurands: [Fe] }
backfill: { quietAfterDays: 1000 }
groups:
  - name: test-engines
    match: { component: engine }
    limits:
      Fe: { caution: 50, alarm: 100 }
  - name: test-gearboxes
    match: { component: gearbox }
    limits:
      Fe: { caution: 100, alarm: 200 }
    population: { measurands: [Cu], minResults: 5, bandHours: [0] }
`;

const DAY = 86_400_000;
/** Samples taken in the last weeks, one a week. */
const sampledAt = (week: number) => new Date(Date.now() - (20 - week) * 7 * DAY).toISOString();

interface Listed {
  id: string;
  severity: string;
  alarm: string;
  closed: { how: string } | null;
  acknowledged: unknown;
  evidence: { measurand: string; rule: string; check?: string; sampleId: string; explanation: string }[];
  context: { measurand: string; rule: string }[];
  withdrawnEvidence?: { measurand: string; sampleId: string; explanation: string }[];
  timeline: { kind: string; sampleId?: string; cleanSamples?: number; reason?: string; reopened?: boolean }[];
}

describe.skipIf(!HAVE_CHROMIUM)('incident cards in Chromium, fed through the results API', () => {
  let redis: RedisServer;
  let serve: WearshiftProcess;
  let browser: BoardBrowser;
  let dir: string;
  let page: Page;
  const problems: string[] = [];
  /** Every chart the pages asked for, by path and query. */
  const chartRequests: string[] = [];

  const post = async (event: object) => {
    const response = await fetch(`${serve.url}/v1/results`, {
      method: 'POST',
      headers: { authorization: `Bearer ${TOKENS.ingest}`, 'content-type': 'application/json' },
      body: JSON.stringify(event),
    });
    expect(response.status, await response.text()).toBe(202);
  };
  const get = async (path: string) => {
    const response = await fetch(`${serve.url}${path}`, { headers: { authorization: `Bearer ${TOKENS.viewer}` } });
    expect(response.status).toBe(200);
    return (await response.json()) as { incidents?: Listed[]; incident?: Listed };
  };
  const incidentsOf = async (unit: string) => (await get(`/v1/incidents?state=all&unit=${encodeURIComponent(unit)}`)).incidents!;
  const incident = async (id: string) => (await get(`/v1/incidents/${encodeURIComponent(id)}`)).incident!;
  /** Waits until the worker has judged the unit's results into an incident that satisfies `test`. */
  const incidentWhere = async (unit: string, test: (i: Listed) => boolean, what: string): Promise<Listed> => {
    let found: Listed | undefined;
    await waitFor(
      () => `${what} on ${unit}\n${serve.output().slice(-4000)}`,
      async () => {
        found = (await incidentsOf(unit)).find(test);
        return found !== undefined;
      },
      WAIT_MS,
      200,
    );
    return (await incident(found!.id)) ?? found!;
  };
  const incidentPage = async (id: string) => {
    await page.goto(`${serve.url}/incidents/${encodeURIComponent(id)}`);
    const card = page.locator(`#incident-card li.incident[data-incident="${id}"]`);
    await card.waitFor({ timeout: WAIT_MS });
    return card;
  };
  const boardCard = (id: string) => page.locator(`#incidents > li.incident[data-incident="${id}"]`);
  const focused = (p: Page) => p.evaluate('(() => { const a = document.activeElement; return { tag: a.tagName, action: a.dataset.action ?? null, card: a.closest("li.incident")?.dataset.incident ?? null }; })()');

  beforeAll(async () => {
    redis = await startRedisServer();
    dir = mkdtempSync(join(tmpdir(), 'wearshift-card-e2e-'));
    writeFileSync(join(dir, 'site.yaml'), CONFIG);
    serve = await startWearshift('serve', {
      env: {
        REDIS_URL: redis.url,
        WEARSHIFT_CONFIG: join(dir, 'site.yaml'),
        WEARSHIFT_TOKEN_INGEST: TOKENS.ingest,
        WEARSHIFT_TOKEN_VIEWER: TOKENS.viewer,
        WEARSHIFT_TOKEN_RESPONDER: TOKENS.responder,
      },
      args: ['--history-threads', '0'],
      readyTimeoutMs: WAIT_MS,
    });
    browser = await launchBoardBrowser({ width: 1400, height: 1000 });
    page = await browser.open();
    page.setDefaultTimeout(WAIT_MS);
    page.on('console', (m) => {
      if (m.type() === 'error' || m.type() === 'warning') problems.push(`${m.type()}: ${m.text()}`);
    });
    page.on('request', (r) => {
      const url = new URL(r.url());
      if (url.pathname.endsWith('/chart.svg')) chartRequests.push(`${decodeURIComponent(url.pathname)}?${url.searchParams.toString()}`);
    });
    await signIn(page, serve.url, TOKENS.responder, 'M. Okafor');
  }, 2 * WAIT_MS);

  afterAll(async () => {
    await browser?.close();
    await serve?.stop();
    await stopAll();
    await redis?.dispose();
    if (dir) rmSync(dir, { recursive: true, force: true });
  }, 2 * WAIT_MS);

  it('shows a withdrawn incident with no current evidence: its findings apart, in italics, as no longer holding, and how it was closed', async () => {
    const unit = 'WD-7';
    await post({ sampleId: 'WD-7-1', unit, component: 'engine', sampledAt: sampledAt(1), unitHours: 1000, oilHours: 250, readings: { Fe: 12 } });
    await post({ sampleId: 'WD-7-2', unit, component: 'engine', sampledAt: sampledAt(2), unitHours: 1250, oilHours: 500, readings: { Fe: 60 } });
    const opened = await incidentWhere(unit, (i) => i.closed === null && i.evidence.some((f) => f.sampleId === 'WD-7-2'), 'an open incident at WD-7-2');
    const explanation = opened.evidence.find((f) => f.measurand === 'Fe')!.explanation;
    expect(explanation).toBeTruthy();
    // While it stands, the board shows it with its evidence.
    await page.goto(serve.url);
    await boardCard(opened.id).locator('ul.evidence[aria-label^="Evidence"] li:not(.withdrawn)').first().waitFor();

    // The lab corrects the result: the incident no longer stands.
    await post({ sampleId: 'WD-7-2', revision: 1, unit, component: 'engine', sampledAt: sampledAt(2), unitHours: 1250, oilHours: 500, readings: { Fe: 20 } });
    const gone = await incidentWhere(unit, (i) => i.id === opened.id && i.closed?.how === 'withdrawn', 'the incident withdrawn');
    expect(gone.evidence).toEqual([]);
    expect(gone.withdrawnEvidence).toMatchObject([{ measurand: 'Fe', sampleId: 'WD-7-2' }]);
    // It leaves the board of open incidents without a reload.
    await boardCard(opened.id).waitFor({ state: 'detached', timeout: WAIT_MS });

    const card = await incidentPage(opened.id);
    await poll(() => card.locator('.state').innerText()).toContain('closed — withdrawn: a late or corrected result changed the history so that this incident no longer stands');
    expect(await card.locator('.state').innerText()).not.toMatch(/waiting|active/);
    // The list is named for what it holds, so that a screen reader does not announce the findings as evidence.
    const items = card.locator('ul.evidence[aria-label="Findings it stood on, none of which stands now"] > li');
    await poll(() => items.count()).toBe(1);
    expect(await card.locator('ul.evidence[aria-label^="Evidence"]').count()).toBe(0);
    // Nothing in the list is current evidence: the one finding is marked and worded as no longer holding.
    expect(await items.locator('xpath=self::li[not(contains(@class, "withdrawn"))]').count()).toBe(0);
    const withdrawn = card.locator('ul.evidence li.withdrawn');
    expect(await withdrawn.innerText()).toBe(`Fe · caution · limit: no longer holds (the results as they stand now do not give it); as first reported for sample WD-7-2: ${explanation}`);
    // Expressions run in the page; the project's TypeScript has no DOM library.
    expect(await page.evaluate("getComputedStyle(document.querySelector('#incident-card li.withdrawn')).fontStyle")).toBe('italic');
    // No forecast and no advisory findings of a sample that no longer gives them; no actions on a closed incident.
    expect(await card.locator('li.forecast, li.forecast-caution').count()).toBe(0);
    expect(await card.locator('.advisory').isHidden()).toBe(true);
    for (const action of ['ack', 'shelve', 'resolve']) expect(await card.locator(`button[data-action="${action}"]`).isDisabled()).toBe(true);
    // The timeline ends with the closing in the same words.
    const timeline = await page.locator('#incident-timeline li').allInnerTexts();
    expect(timeline.at(-1)).toContain('withdrawn: a late or corrected result changed the history so that this incident no longer stands');
    // Nothing to chart, and the page says so rather than showing an empty section; the caution stays.
    expect(await card.locator('.chart .chart-problem').innerText()).toBe('No measurand to chart.');
    await poll(() => page.locator('#incident-charts').innerText()).toContain('No measurand to chart');
    expect(await page.locator('footer').innerText()).toContain('wearshift advises');
  }, 3 * WAIT_MS);

  it('shows a fault of the whole sample as about the sample: no metal named, no chart asked for, a note instead', async () => {
    const unit = 'UH-3';
    const readings = { Fe: 11, Cu: 3, Si: 5, Pb: 2 };
    await post({ sampleId: 'UH-3-1', unit, component: 'engine', sampledAt: sampledAt(1), unitHours: 5000, oilHours: 250, readings: { Fe: 10, Cu: 2, Si: 5, Pb: 1 } });
    await post({ sampleId: 'UH-3-2', unit, component: 'engine', sampledAt: sampledAt(2), unitHours: 5250, oilHours: 500, readings });
    // The same readings again, and unit hours lower than the last sample's: the same bottle sent twice under a new label.
    await post({ sampleId: 'UH-3-3', unit, component: 'engine', sampledAt: sampledAt(3), unitHours: 4000, oilHours: 750, readings });
    const sampling = await incidentWhere(unit, (i) => i.closed === null && i.evidence.some((f) => f.sampleId === 'UH-3-3'), 'a sampling incident at UH-3-3');
    expect(sampling.evidence.map((f) => f.check).sort()).toEqual(['duplicate-bottle', 'unit-hours-back']);
    // Filed under a metal, shown as about the sample.
    expect(sampling.evidence.every((f) => f.rule === 'sampling' && ['Fe', 'Cu', 'Si', 'Pb'].includes(f.measurand))).toBe(true);

    const before = chartRequests.length;
    await page.goto(serve.url);
    const card = boardCard(sampling.id);
    await card.waitFor();
    await card.scrollIntoViewIfNeeded();
    await poll(() => card.locator('h3').innerText()).toBe('UH-3 / engine — sample');
    const evidence = card.locator('ul.evidence[aria-label^="Evidence"] > li');
    await poll(() => evidence.count()).toBe(2);
    for (const text of await evidence.allInnerTexts()) expect(text).toMatch(/^sample · caution · sampling: /);
    expect(await evidence.allInnerTexts()).toContainEqual(expect.stringMatching(/^sample · caution · sampling: Unit hours 4,?000 are lower than the 5,?250 of the last accepted sample, UH-3-2/));
    expect(await card.locator('.chart .chart-problem').innerText()).toBe(WHOLE_SAMPLE_NOTE);
    expect(await card.locator('.chart-caption').innerText()).toBe('');
    expect(await card.locator('.chart svg').count()).toBe(0);
    // The sample in doubt is asked about, by its id.
    expect(await card.locator('.sample-verdict').innerText()).toContain('UH-3-3');

    // Its incident page: every finding about the sample, no metal, no trend asked for, the note in place of charts.
    const pageCard = await incidentPage(sampling.id);
    await poll(() => pageCard.locator('ul.evidence[aria-label^="Evidence"] > li').count()).toBe(2);
    expect(await pageCard.locator('h3').innerText()).toBe('UH-3 / engine — sample');
    expect(await pageCard.locator('.chart .chart-problem').innerText()).toBe(WHOLE_SAMPLE_NOTE);
    await poll(() => page.locator('#incident-charts').innerText()).toContain('A fault of the whole sample');
    const timeline = await page.locator('#incident-timeline li').allInnerTexts();
    expect(timeline.filter((l) => / sampling /.test(l)).length).toBeGreaterThan(0);
    for (const line of timeline.filter((l) => / sampling /.test(l))) expect(line).toMatch(/: sample sampling /);
    expect(await page.locator('footer').innerText()).toContain('wearshift advises');
    // Neither page asked for a chart of this component.
    expect(chartRequests.slice(before).filter((r) => r.includes('/units/UH-3/'))).toEqual([]);
    // Its component page shows every trend (where the note sends people).
    await pageCard.locator('h3 a').click();
    await page.waitForURL(/\/units\/UH-3\/components\/engine$/);
    await poll(() => page.locator('#charts figure svg[role="img"]').count()).toBeGreaterThan(0);
  }, 3 * WAIT_MS);

  it("lists the advisory findings of the incident's sample under their own heading, apart from the evidence, with the caution on its chart", async () => {
    // Like-for-like gearboxes at the same oil hours: copper about 10 ppm.
    const copper = [10, 11, 9, 10, 12, 10, 9, 11];
    for (const [i, cu] of copper.entries()) {
      await post({ sampleId: `AV-${i + 1}-1`, unit: `AV-${i + 1}`, component: 'gearbox', sampledAt: sampledAt(1), unitHours: 2000, oilHours: 200, readings: { Fe: 20, Cu: cu } });
    }
    // Every one of them stored and judged: the group's statistics hold their copper.
    for (let i = 1; i <= copper.length; i += 1) {
      await waitFor(`gearbox AV-${i} judged`, async () => (await fetch(`${serve.url}/v1/units/AV-${i}/components/gearbox/series`, { headers: { authorization: `Bearer ${TOKENS.viewer}` } })).status === 200, WAIT_MS, 250);
    }
    // A gearbox sampled months later is judged against the group's statistics of the months before its own: once its
    // series shows copper limits, the fleet's results are in them.
    await post({ sampleId: 'AV-10-1', unit: 'AV-10', component: 'gearbox', sampledAt: sampledAt(18), unitHours: 2000, oilHours: 200, readings: { Fe: 20, Cu: 10 } });
    await waitFor('population limits on copper for the gearboxes', async () => {
      const response = await fetch(`${serve.url}/v1/units/AV-10/components/gearbox/series`, { headers: { authorization: `Bearer ${TOKENS.viewer}` } });
      return response.status === 200 && JSON.stringify(await response.json()).includes('"kind":"limits"');
    }, WAIT_MS, 250);
    // Months later (a sample is judged against the group's statistics of the months before its own): iron past its
    // caution limit opens an incident; copper far above the group's band is advice beside it.
    await post({ sampleId: 'AV-9-1', unit: 'AV-9', component: 'gearbox', sampledAt: sampledAt(19), unitHours: 2000, oilHours: 200, readings: { Fe: 150, Cu: 40 } });
    const opened = await incidentWhere('AV-9', (i) => i.closed === null, 'an open incident');
    expect(opened.evidence.map((f) => `${f.measurand} ${f.rule}`)).toEqual(['Fe limit']);
    expect(opened.context.map((f) => `${f.measurand} ${f.rule}`)).toEqual(['Cu population']);

    await page.goto(serve.url);
    const card = boardCard(opened.id);
    await card.waitFor();
    await card.scrollIntoViewIfNeeded();
    // The list is named by its heading, for a screen reader as for the eye.
    const advisory = card.getByRole('list', { name: ADVISORY_HEADING });
    await poll(() => advisory.isVisible()).toBe(true);
    expect(await card.locator('.advisory-heading').innerText()).toBe(ADVISORY_HEADING);
    const items = advisory.locator('li');
    expect(await items.count()).toBe(1);
    expect(await items.first().innerText()).toMatch(/^Cu · (caution|alarm) · population: Cu 40 ppm at 200 oil hours is above the population (caution|alarm) level of /);
    // The evidence holds the iron alone; the card's severity is the evidence's, its title the iron's.
    const evidence = await card.locator('ul.evidence[aria-label^="Evidence"] > li:not(.forecast):not(.forecast-caution)').allInnerTexts();
    expect(evidence).toHaveLength(1);
    expect(evidence[0]).toMatch(/^Fe · caution · limit: /);
    expect(await card.getAttribute('data-severity')).toBe('caution');
    expect(await card.locator('h3').innerText()).toBe('AV-9 / gearbox — Fe');
    // The chart is the iron's, and carries the caution under its legend.
    const svg = card.locator('.chart svg[role="img"]');
    await svg.waitFor({ timeout: WAIT_MS });
    expect(await svg.getAttribute('aria-label')).toMatch(/^Trend of Fe/);
    expect(await svg.locator('[data-advisory="caution"]').textContent()).toContain('wearshift advises');
    expect(await page.locator('footer').innerText()).toContain('wearshift advises');
    // Other cards carry no such heading.
    for (const other of await page.locator(`#incidents > li.incident:not([data-incident="${opened.id}"])`).all()) expect(await other.locator('.advisory').isHidden()).toBe(true);
  }, 3 * WAIT_MS);

  it('names the sample an incident returned at, and withdraws its acknowledgement when it reopens; the keyboard stays on the card', async () => {
    const unit = 'RO-4';
    await post({ sampleId: 'RO-4-1', unit, component: 'engine', sampledAt: sampledAt(1), unitHours: 3000, oilHours: 250, readings: { Fe: 60 } });
    const opened = await incidentWhere(unit, (i) => i.closed === null, 'an open incident');
    await page.goto(serve.url);
    const card = boardCard(opened.id);
    await card.waitFor();
    // Acknowledged from the keyboard.
    await card.locator('textarea').fill('Engine booked for inspection at the next stop.');
    await card.locator('button[data-action="ack"]').focus();
    await page.keyboard.press('Enter');
    await poll(() => card.locator('.action-status').innerText()).toBe('Acknowledged.');
    await poll(() => card.locator('.state').innerText()).toContain('acknowledged · by M. Okafor');
    // The keyboard is still on the card after its button was disabled: on its title.
    await poll(() => focused(page)).toMatchObject({ tag: 'H3', card: opened.id });
    await page.keyboard.press('Tab');
    expect(await focused(page)).toMatchObject({ card: opened.id });

    // Two samples below the limit (not so far below as to put the sample in doubt): returned to normal, and as it
    // was acknowledged, closed.
    await post({ sampleId: 'RO-4-2', unit, component: 'engine', sampledAt: sampledAt(2), unitHours: 3250, oilHours: 500, readings: { Fe: 45 } });
    await post({ sampleId: 'RO-4-3', unit, component: 'engine', sampledAt: sampledAt(3), unitHours: 3500, oilHours: 750, readings: { Fe: 46 } });
    const closed = await incidentWhere(unit, (i) => i.id === opened.id && i.closed !== null, 'the incident closed on its return');
    expect(closed.closed?.how).toBe('acknowledged-and-returned');
    expect(closed.timeline.find((e) => e.kind === 'returned')).toMatchObject({ sampleId: 'RO-4-3', cleanSamples: 2 });
    await card.waitFor({ state: 'detached', timeout: WAIT_MS });
    const closedCard = await incidentPage(opened.id);
    await poll(() => closedCard.locator('.state').innerText()).toContain('closed — returned to normal and acknowledged');
    await poll(() => page.locator('#incident-timeline li').allInnerTexts()).toContainEqual(expect.stringMatching(/: returned to normal \(sample RO-4-3\), after 2 samples without findings$/));

    // Iron high again within the reopening window: the same incident reopens and its acknowledgement is withdrawn.
    await page.goto(serve.url);
    await page.locator('#summary').waitFor();
    await post({ sampleId: 'RO-4-4', unit, component: 'engine', sampledAt: sampledAt(4), unitHours: 3750, oilHours: 1000, readings: { Fe: 62 } });
    const reopened = await incidentWhere(unit, (i) => i.id === opened.id && i.closed === null, 'the incident reopened');
    expect(reopened.acknowledged).toBeNull();
    // Brought onto the open board by the live feed, as unacknowledged and waiting.
    await card.waitFor({ timeout: WAIT_MS });
    await poll(() => card.locator('.state').innerText()).toMatch(/^active, unacknowledged · waiting /);
    expect(await card.locator('button[data-action="ack"]').isDisabled()).toBe(false);
    await incidentPage(opened.id);
    const lines = page.locator('#incident-timeline li');
    await poll(() => lines.allInnerTexts()).toContainEqual(expect.stringMatching(/: reopened \(sample RO-4-4\)$/));
    const texts = await lines.allInnerTexts();
    expect(texts).toContainEqual(expect.stringMatching(/: acknowledgement withdrawn — reopened after it had been closed$/));
    const at = (pattern: RegExp) => texts.findIndex((t) => pattern.test(t));
    expect(at(/: acknowledged by M\. Okafor/)).toBeGreaterThanOrEqual(0);
    expect(at(/: returned to normal \(sample RO-4-3\)/)).toBeLessThan(at(/: acknowledgement withdrawn/));
    expect(await page.locator('footer').innerText()).toContain('wearshift advises');
  }, 3 * WAIT_MS);

  it('raised no error in the pages on the way', () => {
    expect([...browser.problems, ...problems]).toEqual([]);
  });
});

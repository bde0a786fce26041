/**
 * The control-room board in a real browser (Debian's Chromium driven by playwright-core) against the real routes,
 * a real incident store in a private redis-server and the demo fleet evaluated by the real core: the page lists
 * the open incidents with their charts, a server-sent event brings a new one in without a reload, acknowledging
 * from the page changes the incident through the API, a viewer token cannot, and the page raises no console error.
 */
import { existsSync, mkdirSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { chromium, type BrowserContext, type Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { SAMPLE_DOUBT, startBoardFixture, TOKENS, type BoardFixture } from './boardFixture.ts';

const CHROMIUM = '/usr/bin/chromium';
const HAVE_CHROMIUM = existsSync(CHROMIUM);
if (!HAVE_CHROMIUM) console.warn(`board e2e skipped: no Chromium at ${CHROMIUM} (apt-get install -y chromium; CI installs it)`);

const OUT = new URL('./out/', import.meta.url).pathname;
const SEVERITY_RANK: Record<string, number> = { watch: 0, caution: 1, alarm: 2 };
/** The machine is shared and small: give the page time, but fail rather than hang. */
const poll = <T>(read: () => T | Promise<T>) => expect.poll(read, { timeout: 120_000, interval: 100 });

describe.skipIf(!HAVE_CHROMIUM)('control-room board in Chromium', () => {
  let fixture: BoardFixture;
  let context: BrowserContext;
  let profile: string;
  let page: Page;
  const problems: string[] = [];
  /** The board's scripts the first page fetched (the entry and the ES modules it imports), by file name. */
  const scripts = new Map<string, { status: number; type: string }>();
  const saved = { ...process.env };

  const watch = (p: Page, into: string[]) => {
    p.on('console', (m) => {
      if (m.type() === 'error' || m.type() === 'warning') into.push(`${m.type()}: ${m.text()}`);
    });
    p.on('pageerror', (e) => into.push(`page error: ${e.message}`));
  };

  const api = async (path: string, token = TOKENS.responder) => {
    const response = await fixture.app.inject({ method: 'GET', url: path, headers: { authorization: `Bearer ${token}` } });
    return response.json();
  };

  const signIn = async (p: Page, token: string, name: string) => {
    await p.goto(fixture.url);
    await p.locator('#token').fill(token);
    await p.locator('#name').fill(name);
    await p.locator('#token').press('Enter');
    await p.locator('#live[data-live="on"]').waitFor();
  };

  beforeAll(async () => {
    fixture = await startBoardFixture([
      ['PS2-P3', 'gearbox'],
      ['PR-2', 'hydraulic'],
      ['GEN-3', 'engine'],
    ]);
    expect(await fixture.feed('PS2-P3', 'gearbox')).toBeGreaterThan(0);
    expect(await fixture.feed('PR-2', 'hydraulic')).toBeGreaterThan(0);
    expect(await fixture.feed(SAMPLE_DOUBT.unit, SAMPLE_DOUBT.component)).toBeGreaterThan(0);
    mkdirSync(OUT, { recursive: true });
    profile = mkdtempSync(join(tmpdir(), 'wearshift-chromium-'));
    context = await chromium.launchPersistentContext(profile, {
      executablePath: CHROMIUM,
      headless: true,
      args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-quic', '--no-first-run', '--disable-component-update', '--disable-sync'],
      viewport: { width: 1920, height: 1080 },
    });
    page = await context.newPage();
    watch(page, problems);
    page.on('response', (r) => {
      const name = /^\/board\/([^/]+\.js)$/.exec(new URL(r.url()).pathname)?.[1];
      if (name !== undefined) scripts.set(name, { status: r.status(), type: r.headers()['content-type'] ?? '' });
    });
  });

  afterAll(async () => {
    await context?.close();
    await fixture?.close();
    if (profile) rmSync(profile, { recursive: true, force: true });
    process.env = saved;
  });

  it('lists the open incidents, most severe first, each with who owns it or how long it has waited, and its chart', async () => {
    await signIn(page, TOKENS.responder, 'R. Tanaka');
    const expected = (await api('/v1/incidents?state=open')).incidents as { id: string; severity: string }[];
    expect(expected.length).toBeGreaterThanOrEqual(2);
    const cards = page.locator('#incidents > li.incident');
    await poll(() => cards.count()).toBe(expected.length);
    const shown = await cards.evaluateAll((els) => els.map((e) => ({ id: e.getAttribute('data-incident'), severity: e.getAttribute('data-severity') })));
    expect(new Set(shown.map((s) => s.id))).toEqual(new Set(expected.map((e) => e.id)));
    const ranks = shown.map((s) => SEVERITY_RANK[s.severity!]!);
    expect([...ranks].sort((a, b) => b - a)).toEqual(ranks);
    // Severity in words and shape, not colour alone.
    // No evidence line stands for nothing (a card with three findings or fewer has no "more" line).
    expect(await page.locator('.incident .evidence li').allInnerTexts()).not.toContain('null');
    const first = cards.first();
    await poll(() => first.locator('.sev').first().innerText()).toMatch(/^[◇▲■]\s+(watch|caution|alarm)$/);
    await poll(() => first.locator('.state').innerText()).toMatch(/unacknowledged · waiting \d+ min/);
    // A chart is drawn when its card comes near the window: each card in turn.
    for (let i = 0; i < expected.length; i += 1) {
      await cards.nth(i).scrollIntoViewIfNeeded();
      await cards.nth(i).locator('.chart svg[role="img"]').waitFor({ timeout: 120_000 });
    }
    const labels = await page.locator('.incident .chart svg').evaluateAll((svgs) => svgs.map((s) => s.getAttribute('aria-label') ?? ''));
    expect(labels).toHaveLength(expected.length);
    for (const label of labels) expect(label).toMatch(/^(Trend of|ISO 4406 cleanliness of)/);
    expect(await page.locator('.incident .chart svg .mark').count()).toBeGreaterThan(0);
    // The entry script and the ES modules it imports all came from /board/ as JavaScript, under the page's policy.
    expect([...scripts.keys()]).toEqual(expect.arrayContaining(['board.js', 'boardView.js', 'card.js', 'liveEvents.js', 'session.js', 'sampleVerdict.js']));
    for (const [name, script] of scripts) expect(script, name).toEqual({ status: 200, type: expect.stringMatching(/^text\/javascript/) });
  });

  it("shows each incident's time to limit, as the API gives it, with the caution that it assumes the present trend continues", async () => {
    const open = (await api('/v1/incidents?state=open')).incidents as { id: string; forecast?: { text: string }[] }[];
    const withForecast = open.filter((i) => (i.forecast?.length ?? 0) > 0);
    expect(withForecast.length).toBeGreaterThan(0);
    for (const incident of withForecast) {
      const card = page.locator(`#incidents > li.incident[data-incident="${incident.id}"]`);
      const items = card.locator('.evidence li.forecast');
      await poll(() => items.count()).toBe(Math.min(4, incident.forecast!.length));
      const texts = await items.evaluateAll((els) => els.map((e) => e.textContent ?? ''));
      for (const [i, t] of texts.entries()) expect(t).toBe(`time to limit: ${incident.forecast![i]!.text}`);
      expect(await card.locator('.evidence li.forecast-caution').innerText()).toContain('A forecast assumes the present trend continues');
    }
  });

  it('brings in a new incident from a server-sent event, without reloading the page', async () => {
    await page.evaluate(() => Object.assign(globalThis, { boardMarker: 'still the same page' }));
    const before = await page.locator('#incidents > li.incident').count();
    expect(await fixture.feed('GEN-3', 'engine')).toBeGreaterThan(0);
    const card = page.locator('#incidents > li.incident[data-incident^="GEN-3/engine"]');
    await card.waitFor({ timeout: 120_000 });
    expect(await page.locator('#incidents > li.incident').count()).toBe(before + 1);
    expect(await page.evaluate(() => (globalThis as { boardMarker?: string }).boardMarker)).toBe('still the same page');
    await poll(() => page.locator('#announcer').innerText()).toContain('GEN-3 / engine');
  });

  it('acknowledges with a note from the page, through the API, using the keyboard', async () => {
    const card = page.locator('#incidents > li.incident[data-incident^="GEN-3/engine"]');
    const id = (await card.getAttribute('data-incident'))!;
    await card.locator('textarea').fill('Checking the coolant system today.');
    await card.locator('button[data-action="ack"]').focus();
    await page.keyboard.press('Enter');
    await poll(() => card.locator('.action-status').innerText()).toBe('Acknowledged.');
    const { incident } = await api(`/v1/incidents/${encodeURIComponent(id)}`);
    expect(incident.acknowledged).toMatchObject({ by: 'R. Tanaka', note: 'Checking the coolant system today.' });
    await poll(() => card.locator('.state').innerText()).toContain('acknowledged · by R. Tanaka');
    expect(await card.locator('button[data-action="ack"]').isDisabled()).toBe(true);
  });

  it('shelves with a reason and resolves with a note; both ask for the note first', async () => {
    const card = page.locator('#incidents > li.incident[data-incident^="PR-2/hydraulic"]');
    const id = (await card.getAttribute('data-incident'))!;
    await card.locator('button[data-action="shelve"]').click();
    await poll(() => card.locator('.action-status').innerText()).toBe('Write a note first: the reason for shelving.');
    expect(await page.evaluate('document.activeElement.tagName')).toBe('TEXTAREA');
    await card.locator('textarea').fill('Filter change booked for the next stop.');
    await card.locator('select').selectOption('8');
    await card.locator('button[data-action="shelve"]').click();
    await poll(() => card.locator('.state').innerText()).toMatch(/shelved until/);
    const shelved = (await api(`/v1/incidents/${encodeURIComponent(id)}`)).incident;
    expect(shelved.shelved).toMatchObject({ by: 'R. Tanaka', reason: 'Filter change booked for the next stop.' });
    const hours = (Date.parse(shelved.shelved.until) - Date.parse(shelved.shelved.at)) / 3_600_000;
    expect(hours).toBeCloseTo(8, 1);
    // A shelved card offers to unshelve instead; a shelving made by mistake is undone from the page.
    await poll(() => card.locator('button[data-action="unshelve"]').isVisible()).toBe(true);
    expect(await card.locator('button[data-action="shelve"]').isHidden()).toBe(true);
    await card.locator('button[data-action="unshelve"]').click();
    await poll(() => card.locator('.state').innerText()).not.toMatch(/shelved until/);
    expect((await api(`/v1/incidents/${encodeURIComponent(id)}`)).incident.shelved).toBeNull();
    await poll(() => card.locator('button[data-action="shelve"]').isVisible()).toBe(true);

    await card.locator('textarea').fill('Filter replaced; bypass valve reseated.');
    await card.locator('button[data-action="resolve"]').click();
    await card.waitFor({ state: 'detached', timeout: 120_000 });
    expect((await api(`/v1/incidents/${encodeURIComponent(id)}`)).incident.closed).toMatchObject({ how: 'resolved', by: 'R. Tanaka' });
  });

  it('says when more incidents are open than the board holds, and shows no such note otherwise', async () => {
    expect(await page.locator('#more-incidents').isHidden()).toBe(true);
    const capped = await context.newPage();
    const cappedProblems: string[] = [];
    watch(capped, cappedProblems);
    // The API answers the board's first page with a cursor to a further page, and that page fails: the board shows
    // what it read and says how many are not shown.
    await capped.route(/\/v1\/incidents\?state=open&limit=\d+$/, async (route) => {
      const response = await route.fetch();
      const body = await response.json();
      await route.fulfill({ response, json: { ...body, next: 'further-page', total: 1234 } });
    });
    await signIn(capped, TOKENS.viewer, 'A. Viewer');
    const shown = ((await api('/v1/incidents?state=open&limit=1000')).incidents as unknown[]).length;
    await poll(() => capped.locator('#incidents > li.incident').count()).toBe(shown);
    await poll(() => capped.locator('#more-incidents').innerText()).toContain(`${1234 - shown} of the 1234 open incidents are not shown`);
    expect(await capped.locator('#more-incidents').innerText()).toContain(`The counts above are of the ${shown} shown`);
    // The failed further page shows in the console as a failed load, nothing else may.
    expect(cappedProblems.filter((p) => !p.includes('Failed to load resource'))).toEqual([]);
    await capped.close();
  });

  it('keeps a viewer token from acknowledging, and says so plainly', async () => {
    const viewer = await context.newPage();
    const viewerProblems: string[] = [];
    watch(viewer, viewerProblems);
    await signIn(viewer, TOKENS.viewer, 'A. Viewer');
    const card = viewer.locator('#incidents > li.incident[data-incident^="PS2-P3/gearbox"]');
    await card.waitFor();
    const id = (await card.getAttribute('data-incident'))!;
    expect(await viewer.locator('#role-note').innerText()).toContain('viewer token');
    for (const action of ['ack', 'shelve', 'resolve']) expect(await card.locator(`button[data-action="${action}"]`).isDisabled()).toBe(true);
    // Should the page ever offer the button anyway, the server refuses and the page shows why.
    await card.locator('button[data-action="ack"]').evaluate((b) => b.removeAttribute('disabled'));
    await card.locator('button[data-action="ack"]').click();
    await poll(() => card.locator('.action-status').innerText()).toMatch(/Refused \(403 forbidden\): this needs the role responder; the token holds viewer/);
    const { incident } = await api(`/v1/incidents/${encodeURIComponent(id)}`);
    expect(incident.acknowledged).toBeNull();
    // The refused request is the one error the browser reports.
    expect(viewerProblems).toEqual([expect.stringContaining('403')]);
    await viewer.close();
  });

  it('opens the component page by keyboard: every series and the incident history', async () => {
    await page.locator('#incidents > li.incident[data-incident^="PS2-P3/gearbox"] h3 a').focus();
    await page.keyboard.press('Enter');
    await page.waitForURL(/\/units\/PS2-P3\/components\/gearbox$/);
    await page.locator('#live[data-live="on"]').waitFor();
    const series = await api('/v1/units/PS2-P3/components/gearbox/series');
    const measurands = (series.measurands as { measurand: string }[]).map((m) => m.measurand);
    expect(measurands.slice(0, 2)).toEqual(['Fe', 'Cu']);
    await poll(() => page.locator('#charts figure svg[role="img"]').count()).toBe(measurands.length);
    // Each series' forecasts under its chart, and the projection drawn dashed with its band on the chart itself.
    const forecasting = (series.measurands as { measurand: string; forecast: { status: string; limits: { text: string }[]; projection: { at?: string }[] } | null }[]).filter(
      (m) => m.forecast !== null && m.forecast.limits.length > 0,
    );
    expect(forecasting.length).toBeGreaterThan(0);
    for (const m of forecasting) {
      const list = page.locator(`#charts ul.forecast[aria-label="Time to limit, ${m.measurand}"] li`);
      await poll(() => list.count()).toBe(new Set(m.forecast!.limits.map((l) => l.text)).size);
    }
    const projected = forecasting.filter((m) => m.forecast!.status === 'forecast' && m.forecast!.projection.some((p) => p.at !== undefined));
    if (projected.length > 0) await poll(() => page.locator('#charts svg [data-forecast-band]').count()).toBeGreaterThan(0);
    expect(await page.locator('#view-title').innerText()).toBe('PS2-P3 / gearbox');
    // What the analysis can judge yet, per measurand, as the series API says it: measurands whose line says the same
    // share one line.
    const readiness = series.readiness as { measurand: string; summary: string }[];
    expect(readiness.length).toBeGreaterThan(0);
    const said = (r: { measurand: string; summary: string }) => r.summary.slice(r.measurand.length + 2);
    await poll(() => page.locator('#readiness li').count()).toBe(new Set(readiness.map(said)).size);
    for (const r of readiness) {
      const line = await page.locator(`#readiness li[data-measurands~="${r.measurand}"]`).innerText();
      expect(line).toContain(said(r));
      expect(line.split(': ')[0]!.split(', ')).toContain(r.measurand);
    }
    const history = page.locator('#history > li');
    await poll(() => history.count()).toBeGreaterThan(0);
    await history.first().locator('summary').focus();
    await page.keyboard.press('Enter');
    await poll(() => history.first().locator('.timeline li').count()).toBeGreaterThan(0);
    expect(await history.first().locator('.timeline li').first().innerText()).toMatch(/opened/);
    await page.screenshot({ path: join(OUT, 'component-wall.png'), fullPage: true });
  });

  it('asks about a sample in doubt and takes the answer: the sample is wrong', async () => {
    await page.goto(fixture.url);
    const card = page.locator(`#incidents > li.incident[data-incident^="${SAMPLE_DOUBT.unit}/${SAMPLE_DOUBT.component}"]`);
    await card.first().waitFor();
    const row = card.first().locator('.sample-verdict');
    expect(await row.isVisible()).toBe(true);
    expect(await row.innerText()).toContain(SAMPLE_DOUBT.sampleId);
    // A machine incident is not asked whether its sample is genuine (one with a rise signalled by a change detector is
    // asked whether the rate is usual instead: tests/e2e/board-actions.test.ts).
    const machine = page.locator(`#incidents > li.incident[data-incident^="PS2-P3/gearbox"] .sample-verdict`).first();
    expect(await machine.locator('button[data-verdict="confirmed"]').isVisible()).toBe(false);
    expect(await machine.locator('button[data-verdict="rejected"]').isVisible()).toBe(false);
    await row.locator('button[data-verdict="rejected"]').click();
    await poll(() => card.first().locator('.action-status').innerText()).toMatch(new RegExp(`Sample ${SAMPLE_DOUBT.sampleId} marked wrong`));
    // The verdict reached the server through the API, as the board user (the worker's side is tests/integration/sample-verdict.test.ts).
    expect(fixture.verdicts).toEqual([{ ...SAMPLE_DOUBT, mark: 'rejected' }]);
  });

  it('starts with a skip link and shows where the keyboard focus is', async () => {
    await page.goto(fixture.url);
    await page.locator('#incidents > li.incident').first().waitFor();
    await page.keyboard.press('Tab');
    // Expressions run in the page; the project's TypeScript has no DOM library.
    expect(await page.evaluate('document.activeElement.className')).toBe('skip-link');
    const focusStyle = async () =>
      page.evaluate('(() => { const s = getComputedStyle(document.activeElement); return { style: s.outlineStyle, width: parseFloat(s.outlineWidth) }; })()');
    expect(await focusStyle()).toEqual({ style: 'solid', width: 3 });
    for (let i = 0; i < 4; i++) await page.keyboard.press('Tab');
    expect(await page.evaluate('document.activeElement.tagName')).toMatch(/^(A|BUTTON|TEXTAREA|SELECT)$/);
    expect(await focusStyle()).toEqual({ style: 'solid', width: 3 });
  });

  it('reads on a wall screen and a phone, with no console error on the way', async () => {
    await page.setViewportSize({ width: 1920, height: 1080 });
    await page.locator('.incident .chart svg').first().waitFor();
    await page.screenshot({ path: join(OUT, 'board-wall.png') });
    await page.setViewportSize({ width: 390, height: 844 });
    await page.waitForTimeout(200);
    const overflow = await page.evaluate('document.documentElement.scrollWidth - document.documentElement.clientWidth');
    expect(overflow).toBeLessThanOrEqual(0);
    await page.screenshot({ path: join(OUT, 'board-phone.png'), fullPage: true });
    expect(problems).toEqual([]);
  });

  it('says plainly when an incident or a component is not known, with nothing empty beside it', async () => {
    await page.setViewportSize({ width: 1280, height: 800 });
    await page.goto(`${fixture.url}/incidents/${encodeURIComponent('NOPE/pump@X-1')}`);
    await poll(() => page.locator('#incident-problem').innerText()).toBe('No incident "NOPE/pump@X-1" is known here.');
    expect(await page.locator('#incident-body').isHidden()).toBe(true);
    expect(await page.locator('#incident-component').isVisible()).toBe(false);
    await page.goto(`${fixture.url}/units/NOPE/components/pump`);
    await poll(() => page.locator('#series-note').innerText()).toMatch(/^No trends: /);
    expect(await page.locator('#component-body').isHidden()).toBe(true);
  });

  it("shows the advisory findings of the evidence's sample on the card, under a heading of their own, apart from the evidence", async () => {
    // A later sample of an invented gearbox: iron past its alarm limit, and four population band findings that open nothing.
    const ref = { unit: 'PS2-P3', component: 'gearbox' };
    const sampledAt = new Date(Date.parse(fixture.samples(ref.unit, ref.component).at(-1)!.sampledAt) + 7 * 86_400_000).toISOString();
    const group = ((await api('/v1/incidents?state=open')).incidents as { id: string; group: string }[]).find((i) => i.id.startsWith('PS2-P3/gearbox'))!.group;
    const base = { ...ref, group, sampleId: 'PS2-P3-ADV-1', sampledAt, basis: 'reading' } as const;
    const evidence = { ...base, measurand: 'Fe', rule: 'limit', disposition: 'incident', severity: 'alarm', value: 250, threshold: 200, explanation: 'Fe above its alarm limit.' } as const;
    const bands = (['Cu', 'Pb', 'Sn', 'Al'] as const).map((m, i) => ({ ...base, measurand: m, rule: 'population', disposition: 'advisory', severity: 'watch', value: 30 + i, threshold: 20, explanation: `${m} above the population band for its oil hours.` }) as const);
    await fixture.store.applySteps(ref, [{ sampleId: base.sampleId, sampledAt, findings: [evidence, ...bands] }], { group, now: new Date(), quietBefore: new Date(0) });
    const open = (await api('/v1/incidents?state=open')).incidents as { id: string; severity: string; evidence: { rule: string; sampleId: string }[]; context: { measurand: string }[] }[];
    const incident = open.find((i) => i.evidence.some((f) => f.sampleId === base.sampleId))!;
    expect(incident.context.map((f) => f.measurand).sort()).toEqual(['Al', 'Cu', 'Pb', 'Sn']);
    expect(incident.severity).toBe('alarm');

    await page.goto(fixture.url);
    if (await page.locator('#token').isVisible()) await signIn(page, TOKENS.viewer, 'A. Viewer');
    const card = page.locator(`#incidents > li.incident[data-incident="${incident.id}"]`);
    await card.waitFor();
    const advisory = card.locator('.advisory');
    expect(await advisory.isVisible()).toBe(true);
    expect(await advisory.locator('.advisory-heading').innerText()).toBe('Also on this sample (advisory, opens no incident)');
    // The card shows the first three and links to the rest; the evidence holds none of them, and the severity is the evidence's.
    const items = advisory.locator('li');
    await poll(() => items.count()).toBe(4);
    expect(await items.nth(0).innerText()).toMatch(/^(Cu|Pb|Sn|Al) · watch · population: \1 above the population band for its oil hours\.$/);
    expect(await items.nth(3).innerText()).toBe('1 more on the incident page');
    expect(await card.locator('ul.evidence[aria-label^="Evidence"] li').allInnerTexts()).not.toContainEqual(expect.stringContaining('population'));
    expect(await card.getAttribute('data-severity')).toBe('alarm');
    // Other cards, with no advisory findings, show no such heading.
    const others = page.locator(`#incidents > li.incident:not([data-incident="${incident.id}"])`);
    expect(await others.count()).toBeGreaterThan(0);
    for (const other of await others.all()) expect(await other.locator('.advisory').isHidden()).toBe(true);

    // The incident page shows every one.
    await page.goto(`${fixture.url}/incidents/${encodeURIComponent(incident.id)}`);
    await poll(() => page.locator('#incident-card .advisory-findings li').count()).toBe(4);
    expect(await page.locator('#incident-card .advisory-findings li.more').count()).toBe(0);
  });
});

/**
 * What the board's incident page says of messages held back and of sample verdicts, in Debian's Chromium (driven by
 * playwright-core) against the real routes and a real incident store in a private redis-server: a message withdrawn
 * because the incident was shelved before it went out reads "not sent: shelved meanwhile" beside its target, and a
 * responder's verdict on the sample in doubt reads who marked which sample how, at its time in the site zone —
 * word for word as the server writes them (src/incidents/model.ts) for the command line. Every wait is for a page
 * state, bounded in minutes.
 */
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { chromium, type BrowserContext, type Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { notifiedTargetsText, sampleVerdictText, type Incident, type NotifyEffect } from '../../src/incidents/model.ts';
import { formatTime } from '../../src/notify/format.ts';
import { SAMPLE_DOUBT, startBoardFixture, TOKENS, type BoardFixture } from './boardFixture.ts';

const CHROMIUM = '/usr/bin/chromium';
const HAVE_CHROMIUM = existsSync(CHROMIUM);
if (!HAVE_CHROMIUM) console.warn(`incident timeline e2e skipped: no Chromium at ${CHROMIUM} (apt-get install -y chromium; CI installs it)`);

/** A zone with an offset, so that a page that ignored the site zone would show a different hour. */
const ZONE = 'Asia/Kolkata';
/** Bounds for a shared, busy machine: generous, and only ever reached when something is broken. */
const WAIT_MS = 180_000;
const poll = <T>(read: () => T | Promise<T>) => expect.poll(read, { timeout: WAIT_MS, interval: 200 });

describe.skipIf(!HAVE_CHROMIUM)("the incident page's timeline in Chromium", () => {
  let fixture: BoardFixture;
  let context: BrowserContext;
  let profile: string;
  let page: Page;
  const problems: string[] = [];

  const call = async (method: 'GET' | 'POST', url: string, payload?: object) => {
    const response = await fixture.app.inject({ method, url, headers: { authorization: `Bearer ${TOKENS.responder}` }, ...(payload !== undefined && { payload }) });
    return { status: response.statusCode, body: response.json() };
  };
  const apiIncident = async (id: string) => (await call('GET', `/v1/incidents/${encodeURIComponent(id)}`)).body.incident as Incident;

  /** The incident page's timeline, once it shows every entry of the record. */
  const timelineOnPage = async (incident: Incident) => {
    await page.goto(`${fixture.url}/incidents/${encodeURIComponent(incident.id)}`);
    if (await page.locator('#token').isVisible()) {
      await page.locator('#token').fill(TOKENS.viewer);
      await page.locator('#name').fill('K. Osei');
      await page.locator('#token').press('Enter');
    }
    await page.locator(`#incident-card .incident[data-incident="${incident.id}"]`).waitFor();
    const lines = page.locator('#incident-timeline li');
    await poll(() => lines.count()).toBe(incident.timeline.length + incident.notifications.length);
    return lines.allInnerTexts();
  };

  beforeAll(async () => {
    fixture = await startBoardFixture([['PS2-P3', 'gearbox']], { timeZone: ZONE });
    expect(await fixture.feed('PS2-P3', 'gearbox')).toBeGreaterThan(0);
    expect(await fixture.feed(SAMPLE_DOUBT.unit, SAMPLE_DOUBT.component)).toBeGreaterThan(0);
    profile = mkdtempSync(join(tmpdir(), 'wearshift-chromium-'));
    context = await chromium.launchPersistentContext(profile, {
      executablePath: CHROMIUM,
      headless: true,
      args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-quic', '--no-first-run', '--disable-component-update', '--disable-sync'],
      viewport: { width: 1600, height: 1000 },
    });
    page = await context.newPage();
    page.setDefaultTimeout(WAIT_MS);
    page.on('console', (m) => {
      if (m.type() === 'error' || m.type() === 'warning') problems.push(`${m.type()}: ${m.text()}`);
    });
    page.on('pageerror', (e) => problems.push(`page error: ${e.message}`));
  }, 2 * WAIT_MS);

  afterAll(async () => {
    await context?.close();
    await fixture?.close();
    if (profile) rmSync(profile, { recursive: true, force: true });
  }, 2 * WAIT_MS);

  it('marks a message the incident outran as not sent, with what changed, beside the messages that went', async () => {
    const announcements = fixture.effects.filter((e): e is NotifyEffect => e.kind === 'notify' && e.incidentId.startsWith('PS2-P3/gearbox@') && e.type === 'wearshift.incident.opened');
    expect(announcements.length).toBeGreaterThan(0);
    const effect = announcements[0]!;
    // Shelved from the board's API while the announcement waited in the queue; then the worker's check before sending.
    const until = new Date(Date.now() + 4 * 3_600_000).toISOString();
    expect((await call('POST', `/v1/incidents/${encodeURIComponent(effect.incidentId)}/shelve`, { by: 'R. Tanaka', until, reason: 'gearbox out for overhaul' })).status).toBe(200);
    const withdrawal = await fixture.store.withdrawMessage(effect, new Date());
    expect(withdrawal?.withdrawn).toMatchObject({ target: `${effect.channel}:${effect.target}`, because: 'shelved' });

    const incident = await apiIncident(effect.incidentId);
    const entry = incident.notifications.find((n) => n.eventSeq === effect.eventSeq)!;
    expect(entry.withdrawn).toHaveLength(1);
    const lines = await timelineOnPage(incident);
    const line = `${formatTime(entry.at, ZONE)}: message "opened" to tier ${entry.tier}: ${notifiedTargetsText(entry)} — ${entry.reason}`;
    expect(line).toContain(`${effect.channel}:${effect.target} (not sent: shelved meanwhile)`);
    expect(lines).toContain(line);
    // Only the message held back says so.
    expect(lines.filter((l) => l.includes('not sent'))).toEqual([line]);
    expect(problems).toEqual([]);
  }, 2 * WAIT_MS);

  it('shows who marked the sample in doubt how, and when, on the incident that holds it', async () => {
    const path = `/v1/units/${encodeURIComponent(SAMPLE_DOUBT.unit)}/components/${SAMPLE_DOUBT.component}/samples/${encodeURIComponent(SAMPLE_DOUBT.sampleId)}/verdict`;
    expect((await call('POST', path, { verdict: 'rejected', by: 'R. Tanaka' })).status).toBe(202);
    const listed = (await call('GET', `/v1/incidents?state=all&unit=${encodeURIComponent(SAMPLE_DOUBT.unit)}`)).body.incidents as { id: string }[];
    const sampling = listed.find((i) => i.id === `${SAMPLE_DOUBT.unit}/${SAMPLE_DOUBT.component}/sampling@${SAMPLE_DOUBT.sampleId}`);
    expect(sampling).toBeDefined();
    const incident = await apiIncident(sampling!.id);
    const words = incident.timeline.filter((e) => e.kind === 'sample-verdict');
    expect(words).toEqual([{ kind: 'sample-verdict', sampleId: SAMPLE_DOUBT.sampleId, verdict: 'rejected', by: 'R. Tanaka', at: expect.any(String) }]);
    const lines = await timelineOnPage(incident);
    expect(lines).toContain(`${formatTime(words[0]!.at, ZONE)}: ${sampleVerdictText({ sampleId: SAMPLE_DOUBT.sampleId, verdict: 'rejected', by: 'R. Tanaka' })}`);
    expect(lines).toContain(`${formatTime(words[0]!.at, ZONE)}: sample ${SAMPLE_DOUBT.sampleId} rejected by R. Tanaka: wrong, kept out of the trend`);
    expect(problems).toEqual([]);
  }, 2 * WAIT_MS);
});

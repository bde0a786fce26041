/**
 * The e-mail's links, followed as an on-call engineer follows them: an incident of the invented demo fleet is
 * evaluated by the real core into a real incident store (private redis-server), its e-mail goes through the real
 * notification channel to a real SMTP server (smtp-server) and is parsed by mailparser; Debian's Chromium (driven
 * by playwright-core) then opens the "Incident" link, which must lead to the board's incident page (not the JSON
 * API), and the acknowledgement link, which must acknowledge. Along the way: the severity in the subject, on the
 * card and in the evidence follow one rule, and the board writes times exactly as e-mails do (same zone, same
 * ISO 8601 form). No step depends on machine speed: every wait is for an event or a page state, bounded in minutes.
 */
import { existsSync, mkdirSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { chromium, type BrowserContext, type Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startMailReceiver, type MailReceiver, type ReceivedMail } from '../../src/demo/mailReceiver.ts';
import type { NotifyEffect } from '../../src/incidents/model.ts';
import { formatTime } from '../../src/notify/format.ts';
import { ADVISORY_CAUTION, severityWords } from '../../src/notify/message.ts';
import { incidentMessage } from '../../src/notify/incidentMessage.ts';
import { notificationChannels } from '../../src/channels/openChannels.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { demoConfig, startBoardFixture, TOKENS, type BoardFixture } from './boardFixture.ts';

const CHROMIUM = '/usr/bin/chromium';
const HAVE_CHROMIUM = existsSync(CHROMIUM);
if (!HAVE_CHROMIUM) console.warn(`e-mail link e2e skipped: no Chromium at ${CHROMIUM} (apt-get install -y chromium; CI installs it)`);

/** A zone with an offset, so that a page that ignored the site zone would show a different hour. */
const ZONE = 'Asia/Kolkata';
const OUT = new URL('./out/', import.meta.url).pathname;
const ACK_SECRET = 'e2e-ack-secret-0123456789abcdef';
/** Bounds for a shared, busy machine: generous, and only ever reached when something is broken. */
const WAIT_MS = 180_000;
const poll = <T>(read: () => T | Promise<T>) => expect.poll(read, { timeout: WAIT_MS, interval: 200 });

describe.skipIf(!HAVE_CHROMIUM)("following an incident e-mail's links in Chromium", () => {
  let fixture: BoardFixture;
  let smtp: MailReceiver;
  let context: BrowserContext;
  let profile: string;
  let page: Page;
  let mail: ReceivedMail;
  let effect: NotifyEffect;
  const problems: string[] = [];
  const saved = { ...process.env };

  const apiIncident = async (id: string) => {
    const response = await fixture.app.inject({ method: 'GET', url: `/v1/incidents/${encodeURIComponent(id)}`, headers: { authorization: `Bearer ${TOKENS.viewer}` } });
    return response.json().incident as { id: string; severity: 'watch' | 'caution' | 'alarm'; peakSeverity: 'watch' | 'caution' | 'alarm'; openedAt: string; acknowledged: { by: string } | null; timeline: unknown[]; notifications: unknown[] };
  };

  /** The line after `label` in the plain-text part: links stand alone on their line. */
  const linkAfter = (label: RegExp) => {
    const lines = (mail.parsed.text ?? '').split('\n');
    const at = lines.findIndex((l) => label.test(l));
    expect(at, `no line matching ${label} in the e-mail`).toBeGreaterThanOrEqual(0);
    return lines[at + 1]!.trim();
  };

  beforeAll(async () => {
    fixture = await startBoardFixture([['PS2-P3', 'gearbox']], { ackSecret: ACK_SECRET, timeZone: ZONE });
    expect(await fixture.feed('PS2-P3', 'gearbox')).toBeGreaterThan(0);
    const mails = fixture.effects.filter((e): e is NotifyEffect => e.kind === 'notify' && e.channel === 'email' && e.type === 'wearshift.incident.opened');
    expect(mails.length).toBeGreaterThan(0);
    effect = mails[0]!;

    smtp = await startMailReceiver();
    const arrived = new Promise<ReceivedMail>((resolve) => smtp.onMail(resolve));
    const channels = notificationChannels(
      {
        ...demoConfig.channels,
        // E-mail only: the demo's webhook needs a secret this test does not hold.
        webhooks: [],
        email: { ...demoConfig.channels.email!, smtp: { host: '127.0.0.1', port: smtp.port } },
        ackLinks: { baseUrl: fixture.url, secretEnv: 'E2E_ACK_SECRET', ttlHours: 24 },
      },
      { logger: silentLogger(), env: { E2E_ACK_SECRET: ACK_SECRET }, timeZone: ZONE },
    );
    try {
      const message = incidentMessage(effect, fixture.samples('PS2-P3', 'gearbox'), fixture.url);
      // What webhooks and MQTT carry as the event data: the caution travels with the severity.
      expect(message.advisory).toBe(ADVISORY_CAUTION);
      expect(message.incident.url).toBe(`${fixture.url}/incidents/${encodeURIComponent(effect.incidentId)}`);
      expect(message.incident.apiUrl).toBe(`${fixture.url}/v1/incidents/${encodeURIComponent(effect.incidentId)}`);
      await channels.deliver({ effect, message, attempt: 1 });
    } finally {
      await channels.close();
    }
    mail = await arrived;

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
    await smtp?.close();
    await fixture?.close();
    if (profile) rmSync(profile, { recursive: true, force: true });
    process.env = saved;
  }, 2 * WAIT_MS);

  it('says the incident severity once in the subject, by the one rule, and carries the caution', async () => {
    const incident = await apiIncident(effect.incidentId);
    const subject = mail.parsed.subject ?? '';
    expect(subject.startsWith(`[wearshift ${severityWords(incident.severity, incident.peakSeverity)}] PS2-P3 / gearbox: New incident — `)).toBe(true);
    // "New incident — new incident, caution: …" said the same thing twice.
    expect(subject.toLowerCase().split('new incident').length - 1).toBe(1);
    expect(mail.parsed.text).toContain(ADVISORY_CAUTION);
    // Times in the site zone, with their offset, and the zone stated.
    expect(mail.parsed.text).toContain(`Open since ${formatTime(incident.openedAt, ZONE)}`);
    expect(formatTime(incident.openedAt, ZONE)).toMatch(/^\d{4}-\d\d-\d\dT\d\d:\d\d\+05:30$/);
    expect(mail.parsed.text).toContain(`site zone ${ZONE}`);
  }, 2 * WAIT_MS);

  it('opens the board incident page from the "Incident" link, not the JSON API', async () => {
    const link = linkAfter(/^Incident on the board/);
    expect(link).toBe(`${fixture.url}/incidents/${encodeURIComponent(effect.incidentId)}`);
    const response = await page.goto(link);
    expect(response?.status()).toBe(200);
    expect(response?.headers()['content-type']).toContain('text/html');
    // The board asks for its token, as the board does.
    await page.locator('#token').fill(TOKENS.viewer);
    await page.locator('#name').fill('K. Osei');
    await page.locator('#token').press('Enter');
    const card = page.locator(`#incident-card .incident[data-incident="${effect.incidentId}"]`);
    await card.waitFor();

    const incident = await apiIncident(effect.incidentId);
    const words = severityWords(incident.severity, incident.peakSeverity);
    await poll(() => card.locator('.incident-head .sev').first().textContent()).toContain(words);
    // The first evidence line carries the incident's severity: the card and its evidence agree.
    await poll(() => card.locator('.evidence li').first().getAttribute('data-severity')).toBe(incident.severity);
    // The board writes times as the e-mail does: the same zone, the same form.
    await poll(() => card.locator('.state').textContent()).toContain(`of ${formatTime(incident.openedAt, ZONE)}`);
    await poll(() => page.locator('#time-note').textContent()).toContain(ZONE);
    // The card's chart says which measurand it shows, and it is the one of the most severe finding.
    const measurand = await card.locator('.chart').getAttribute('data-measurand');
    // The invented fleet's gearbox story is iron (its iron wear rate triples); copper only follows.
    expect(measurand).toBe('Fe');
    await poll(() => card.locator('.chart-caption').textContent()).toContain(`Trend of ${measurand}`);
    await card.locator('.chart svg[role="img"]').waitFor();
    expect(await card.locator('.chart svg').getAttribute('data-measurand')).toBe(measurand);
    await poll(() => page.locator('#incident-timeline li').count()).toBeGreaterThan(0);
    // The timeline holds the verdict's entries and every message sent about the incident, in time order.
    const timeline = await page.locator('#incident-timeline li').allInnerTexts();
    expect(timeline.length).toBe(incident.timeline.length + incident.notifications.length);
    expect(timeline.some((t) => /message "opened" to tier 0: email:/.test(t))).toBe(true);
    const times = timeline.map((t) => t.slice(0, t.indexOf(': ')));
    expect([...times].sort()).toEqual(times);
    // Nothing stands in the evidence that is not a finding, a link to more, or a forecast.
    expect(await card.locator('.evidence li').allInnerTexts()).not.toContain('null');
    expect(await page.locator('#incident-component').getAttribute('href')).toBe('/units/PS2-P3/components/gearbox');
    await page.locator('#incident-charts figure svg[role="img"]').first().waitFor();
    mkdirSync(OUT, { recursive: true });
    await page.screenshot({ path: join(OUT, 'incident-page.png'), fullPage: true });
  }, 2 * WAIT_MS);

  it('acknowledges from the acknowledgement link, and the incident page shows it', async () => {
    const ackLink = linkAfter(/^Acknowledge \(a page asks you to confirm\)/);
    expect(ackLink.startsWith(`${fixture.url}/ack/`)).toBe(true);
    await page.goto(ackLink);
    await page.locator('input[name="name"]').fill('K. Osei');
    await page.locator('button[type="submit"]').click();
    await poll(() => page.locator('h1').textContent()).toContain('acknowledged');
    await poll(async () => (await apiIncident(effect.incidentId)).acknowledged?.by).toBe('K. Osei');

    // Back to the board's page for the incident by the page's own link (the token stays in this tab).
    await page.locator('a', { hasText: 'The incident on the board' }).click();
    await page.waitForURL(`${fixture.url}/incidents/${encodeURIComponent(effect.incidentId)}`);
    const card = page.locator(`#incident-card .incident[data-incident="${effect.incidentId}"]`);
    await poll(() => card.getAttribute('data-acknowledged')).toBe('true');
    await poll(() => card.locator('.state').textContent()).toContain('by K. Osei');
    expect(problems).toEqual([]);
  }, 2 * WAIT_MS);
});

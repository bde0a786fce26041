/**
 * A card's actions in Chromium against the real routes: one request at a time (a second press while the first is on
 * its way sends nothing), the verdict on a sample in doubt shown once given (who, which, when) with only the taking
 * back offered, the word that a rate a change detector signals as a rise is the component's usual one asked, sent and
 * shown the same way, the keyboard focus kept on the board when a resolved card goes, and card ids that never repeat.
 */
import type { Page, Route } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { HAVE_CHROMIUM, launchBoardBrowser, poll, signIn, type BoardBrowser } from './boardBrowser.ts';
import { SAMPLE_DOUBT, startBoardFixture, TOKENS, type BoardFixture } from './boardFixture.ts';

describe.skipIf(!HAVE_CHROMIUM)('board card actions in Chromium', () => {
  let fixture: BoardFixture;
  let browser: BoardBrowser;
  let page: Page;

  const api = async (path: string) => (await fixture.app.inject({ url: path, headers: { authorization: `Bearer ${TOKENS.viewer}` } })).json();
  const card = (p: Page, idPrefix: string) => p.locator(`#incidents > li.incident[data-incident^="${idPrefix}"]`).first();

  /** Holds the requests whose address matches until released, counting them as they reach the network. */
  async function holdRequests(p: Page, pattern: RegExp) {
    const seen: string[] = [];
    let release!: () => void;
    const held = new Promise<void>((resolve) => (release = resolve));
    await p.route(pattern, async (route: Route) => {
      seen.push(route.request().method());
      await held;
      await route.continue();
    });
    return { seen, release };
  }

  beforeAll(async () => {
    fixture = await startBoardFixture([
      ['PS2-P3', 'gearbox'],
      ['PR-2', 'hydraulic'],
      ['GEN-3', 'engine'],
      ['GEN-1', 'engine'],
    ]);
    expect(await fixture.feed('PS2-P3', 'gearbox')).toBeGreaterThan(0);
    expect(await fixture.feed('PR-2', 'hydraulic')).toBeGreaterThan(0);
    expect(await fixture.feed(SAMPLE_DOUBT.unit, SAMPLE_DOUBT.component)).toBeGreaterThan(0);
    // The demo's GEN-1 engine: an aluminium rise CUSUM signals on a steady, healthy trend (a baseline learnt low).
    expect(await fixture.feed('GEN-1', 'engine')).toBeGreaterThan(0);
    browser = await launchBoardBrowser();
    page = await browser.open();
    await signIn(page, fixture.url, TOKENS.responder, 'R. Tanaka');
    await page.locator('#incidents > li.incident').first().waitFor();
  });

  afterAll(async () => {
    await browser?.close();
    await fixture?.close();
  });

  it('sends an acknowledgement once however often it is pressed while on its way', async () => {
    const target = card(page, 'PS2-P3/gearbox');
    const id = (await target.getAttribute('data-incident'))!;
    const hold = await holdRequests(page, /\/v1\/incidents\/[^?]+\/ack$/);
    const ack = target.locator('button[data-action="ack"]');
    await ack.click();
    await poll(() => hold.seen.length).toBe(1);
    // Marked unavailable while on its way; the card's other actions too.
    expect(await ack.getAttribute('aria-disabled')).toBe('true');
    expect(await target.locator('button[data-action="resolve"]').getAttribute('aria-disabled')).toBe('true');
    // Pressed again regardless (a double click, an impatient Enter): nothing more is sent.
    await ack.click({ force: true });
    await ack.dispatchEvent('click');
    hold.release();
    await poll(() => target.locator('.action-status').getAttribute('data-kind')).toBe('done');
    await page.unroute(/\/v1\/incidents\/[^?]+\/ack$/);
    expect(hold.seen).toEqual(['POST']);
    const incident = (await api(`/v1/incidents/${encodeURIComponent(id)}`)).incident;
    expect(incident.timeline.filter((e: { kind: string }) => e.kind === 'acknowledged')).toHaveLength(1);
    // After the answer the card's actions follow the incident again.
    expect(await target.locator('button[data-action="resolve"]').getAttribute('aria-disabled')).toBeNull();
    expect(await target.locator('button[data-action="resolve"]').isEnabled()).toBe(true);
  });

  it('sends a sample verdict once, then shows it with who gave it, and offers only to take it back', async () => {
    const target = card(page, `${SAMPLE_DOUBT.unit}/${SAMPLE_DOUBT.component}`);
    const row = target.locator('.sample-verdict');
    await poll(() => row.getAttribute('data-verdict')).toBe('none');
    const hold = await holdRequests(page, /\/samples\/[^/]+\/verdict$/);
    const genuine = row.locator('button[data-verdict="confirmed"]');
    await genuine.click();
    await poll(() => hold.seen.length).toBe(1);
    expect(await row.locator('button[data-verdict="rejected"]').getAttribute('aria-disabled')).toBe('true');
    await genuine.dispatchEvent('click');
    await row.locator('button[data-verdict="rejected"]').dispatchEvent('click');
    hold.release();
    await poll(() => target.locator('.action-status').getAttribute('data-kind')).toBe('done');
    await page.unroute(/\/samples\/[^/]+\/verdict$/);
    expect(hold.seen).toEqual(['POST']);
    expect(fixture.verdicts).toEqual([{ ...SAMPLE_DOUBT, mark: 'confirmed' }]);

    const shown = async (p: Page) => {
      const r = p.locator(`li.incident[data-incident^="${SAMPLE_DOUBT.unit}/"] .sample-verdict`).first();
      await poll(() => r.getAttribute('data-verdict')).toBe('confirmed');
      expect(await r.innerText()).toMatch(new RegExp(`${SAMPLE_DOUBT.sampleId} .*was marked genuine.* by R\\. Tanaka at \\d{4}-\\d\\d-\\d\\dT\\d\\d:\\d\\dZ`));
      // The question is not asked again: only taking the verdict back is offered.
      expect(await r.locator('button[data-verdict="confirmed"]').isVisible()).toBe(false);
      expect(await r.locator('button[data-verdict="rejected"]').isVisible()).toBe(false);
      expect(await r.locator('button[data-verdict="withdrawn"]').isVisible()).toBe(true);
      return r;
    };
    await shown(page);
    // As the server keeps it: after a fresh load of the board, and on the incident page.
    await page.goto(fixture.url);
    await shown(page);
    const incidentPage = await browser.open();
    await signIn(incidentPage, `${fixture.url}/incidents/${encodeURIComponent((await target.getAttribute('data-incident'))!)}`, TOKENS.responder, 'R. Tanaka');
    const onPage = await shown(incidentPage);
    await onPage.locator('button[data-verdict="withdrawn"]').click();
    await poll(() => onPage.getAttribute('data-verdict')).toBe('none');
    expect(await onPage.innerText()).toContain('took an earlier verdict back');
    expect(await onPage.locator('button[data-verdict="confirmed"]').isVisible()).toBe(true);
    expect(fixture.verdicts.at(-1)).toEqual({ ...SAMPLE_DOUBT, mark: null });
    await incidentPage.close();
  });

  it('asks of a rise signalled by a change detector whether the rate is usual, sends the word once and shows it', async () => {
    const target = card(page, 'GEN-1/engine');
    const row = target.locator('.sample-verdict');
    // The word given is looked up when the card comes near the window.
    await target.scrollIntoViewIfNeeded();
    await poll(() => row.getAttribute('data-question')).toBe('rise');
    await poll(() => row.getAttribute('data-verdict')).toBe('none');
    const evidence = (await api(`/v1/incidents/${encodeURIComponent((await target.getAttribute('data-incident'))!)}`)).incident.evidence as { sampleId: string; rule: string; direction?: string; measurand: string }[];
    const rise = evidence.find((f) => (f.rule === 'cusum' || f.rule === 'ewma') && f.direction === 'up')!;
    expect(await row.innerText()).toContain(`Sample ${rise.sampleId}`);
    expect(await row.innerText()).toContain(`signals a rise of the ${rise.measurand} wear rate`);
    // A machine incident is not asked whether its sample is genuine.
    expect(await row.locator('button[data-verdict="confirmed"]').isVisible()).toBe(false);
    expect(await row.locator('button[data-verdict="rejected"]').isVisible()).toBe(false);
    const usual = row.locator('button[data-verdict="usual-rate"]');
    const hold = await holdRequests(page, /\/samples\/[^/]+\/verdict$/);
    await usual.click();
    await poll(() => hold.seen.length).toBe(1);
    await usual.dispatchEvent('click');
    hold.release();
    await poll(() => target.locator('.action-status').getAttribute('data-kind')).toBe('done');
    await page.unroute(/\/samples\/[^/]+\/verdict$/);
    expect(hold.seen).toEqual(['POST']);
    expect(fixture.verdicts.filter((v) => v.unit === 'GEN-1')).toEqual([{ unit: 'GEN-1', component: 'engine', sampleId: rise.sampleId, mark: 'usual-rate' }]);
    // As the server keeps it, after a fresh load: who said it, and only the taking back offered.
    await page.goto(fixture.url);
    await card(page, 'GEN-1/engine').scrollIntoViewIfNeeded();
    const again = card(page, 'GEN-1/engine').locator('.sample-verdict');
    await poll(() => again.getAttribute('data-verdict')).toBe('usual-rate');
    expect(await again.innerText()).toMatch(new RegExp(`${rise.sampleId} .*was marked as this component's usual rate.* by R\\. Tanaka at \\d{4}-\\d\\d-\\d\\dT\\d\\d:\\d\\dZ`));
    expect(await again.locator('button[data-verdict="usual-rate"]').isVisible()).toBe(false);
    expect(await again.locator('button[data-verdict="withdrawn"]').isVisible()).toBe(true);
  });

  it('gives every element on the board an id of its own, also after cards come and go within one clock tick', async () => {
    // A clock that stands still: ids made of the count of cards and the time would repeat.
    const fixed = await browser.open();
    await fixed.clock.setFixedTime(new Date());
    await signIn(fixed, fixture.url, TOKENS.responder, 'R. Tanaka');
    const before = (await api('/v1/incidents?state=open')).incidents.length;
    expect(before).toBeGreaterThanOrEqual(3);
    await poll(() => fixed.locator('#incidents > li.incident').count()).toBe(before);
    // The first card goes (resolved elsewhere), then a new incident comes in: the board has one card fewer meanwhile.
    const gone = (await fixed.locator('#incidents > li.incident').first().getAttribute('data-incident'))!;
    const resolved = await fixture.app.inject({ method: 'POST', url: `/v1/incidents/${encodeURIComponent(gone)}/resolve`, headers: { authorization: `Bearer ${TOKENS.responder}` }, payload: { by: 'A. Engineer', note: 'Done.' } });
    expect(resolved.statusCode).toBe(200);
    await poll(() => fixed.locator('#incidents > li.incident').count()).toBe(before - 1);
    expect(await fixture.feed('GEN-3', 'engine')).toBeGreaterThan(0);
    const count = (await api('/v1/incidents?state=open')).incidents.length;
    expect(count).toBeGreaterThanOrEqual(before);
    await poll(() => fixed.locator('#incidents > li.incident').count()).toBe(count);
    const ids: string[] = await fixed.evaluate('[...document.querySelectorAll("[id]")].map((e) => e.id)');
    expect(ids.length).toBeGreaterThan(count);
    expect(new Set(ids).size).toBe(ids.length);
    await fixed.close();
    expect(browser.problems).toEqual([]);
  });
  it('keeps the keyboard on the board when a resolved card goes: on the next card, else on the view title', async () => {
    await page.goto(fixture.url);
    await page.locator('#incidents > li.incident').nth(1).waitFor();
    const ids = await page.locator('#incidents > li.incident').evaluateAll((nodes) => nodes.map((n) => (n as unknown as { dataset: { incident: string } }).dataset.incident));
    const first = page.locator(`#incidents > li.incident[data-incident="${ids[0]}"]`);
    await first.locator('textarea').focus();
    await page.keyboard.type('Breather replaced.');
    await first.locator('button[data-action="resolve"]').focus();
    await page.keyboard.press('Enter');
    await first.waitFor({ state: 'detached', timeout: 120_000 });
    const focused = async () =>
      page.evaluate('(() => { const a = document.activeElement; return { tag: a.tagName, id: a.id, card: a.closest("li.incident")?.dataset.incident ?? null }; })()');
    expect(await focused()).toMatchObject({ tag: 'H3', card: ids[1] });
    // Resolve every card left, the last one included: the focus ends on the view's title.
    for (const id of ids.slice(1)) {
      const next = page.locator(`#incidents > li.incident[data-incident="${id}"]`);
      await next.locator('textarea').fill('Done.');
      await next.locator('button[data-action="resolve"]').focus();
      await page.keyboard.press('Enter');
      await next.waitFor({ state: 'detached', timeout: 120_000 });
    }
    expect(await focused()).toMatchObject({ id: 'view-title' });
  });

});

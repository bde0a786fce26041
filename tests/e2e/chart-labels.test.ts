/**
 * Trend-chart words in a real browser (Debian's Chromium via playwright-core): every chart of the invented demo
 * fleet's story components, at the board's card width and at the component page's width, is laid out by Chromium
 * and the bounding box of every text element measured. No two words may overlap, and none may stand outside the
 * picture. Each panel's heading names the measurand, so that a chart shown without its page title still says what
 * it shows.
 */
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { chromium, type BrowserContext, type Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startBoardFixture, TOKENS, type BoardFixture } from './boardFixture.ts';

const CHROMIUM = '/usr/bin/chromium';
const HAVE_CHROMIUM = existsSync(CHROMIUM);
if (!HAVE_CHROMIUM) console.warn(`chart label e2e skipped: no Chromium at ${CHROMIUM} (apt-get install -y chromium)`);

const COMPONENTS: [string, string][] = [
  ['PS2-P3', 'gearbox'],
  ['GEN-3', 'engine'],
  ['PR-2', 'hydraulic'],
];
/** The board card's width and the component page's. */
const WIDTHS = [640, 760];

interface Box {
  text: string;
  x0: number;
  y0: number;
  x1: number;
  y1: number;
}

describe.skipIf(!HAVE_CHROMIUM)('trend chart labels in Chromium', { timeout: 600_000 }, () => {
  let fixture: BoardFixture;
  let context: BrowserContext;
  let profile: string;
  let page: Page;

  beforeAll(async () => {
    fixture = await startBoardFixture(COMPONENTS);
    profile = mkdtempSync(join(tmpdir(), 'wearshift-chromium-'));
    context = await chromium.launchPersistentContext(profile, {
      executablePath: CHROMIUM,
      headless: true,
      args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-quic', '--no-first-run', '--disable-component-update', '--disable-sync'],
    });
    page = await context.newPage();
    page.setDefaultTimeout(180_000);
  }, 600_000);

  afterAll(async () => {
    await context?.close();
    await fixture?.close();
    if (profile) rmSync(profile, { recursive: true, force: true });
  });

  const get = async (url: string) => {
    const r = await fixture.app.inject({ method: 'GET', url, headers: { authorization: `Bearer ${TOKENS.viewer}` } });
    expect(r.statusCode, url).toBe(200);
    return r;
  };

  /** The text boxes of an SVG as Chromium lays it out, in the SVG's own coordinates. */
  const boxesOf = async (svg: string): Promise<{ width: number; height: number; boxes: Box[] }> => {
    await page.setContent(`<!DOCTYPE html><html><body style="margin:0">${svg}</body></html>`);
    return (await page.evaluate(`(() => {
      const svg = document.querySelector('svg');
      const boxes = [...svg.querySelectorAll('text')].filter((t) => t.textContent.trim() !== '').map((t) => {
        const b = t.getBBox();
        return { text: t.textContent, x0: b.x, y0: b.y, x1: b.x + b.width, y1: b.y + b.height };
      });
      return { width: svg.viewBox.baseVal.width, height: svg.viewBox.baseVal.height, boxes };
    })()`)) as { width: number; height: number; boxes: Box[] };
  };

  it('lays out every word of every chart apart from the others and inside the picture, and names the measurand', async () => {
    const problems: string[] = [];
    let charts = 0;
    for (const [unit, component] of COMPONENTS) {
      const base = `/v1/units/${encodeURIComponent(unit)}/components/${encodeURIComponent(component)}`;
      const series = (await get(`${base}/series`)).json() as { measurands: { measurand: string }[] };
      for (const { measurand } of series.measurands) {
        for (const width of WIDTHS) {
          const svg = (await get(`${base}/chart.svg?${new URLSearchParams({ measurand, title: 'none', width: String(width) })}`)).body;
          const { width: w, height: h, boxes } = await boxesOf(svg);
          charts += 1;
          const where = `${unit}/${component} ${measurand} at ${width} px`;
          // Half a pixel of slack: glyph boxes of neighbouring lines touch by design.
          const slack = 0.5;
          for (const b of boxes) {
            if (b.x0 < -slack || b.y0 < -slack || b.x1 > w + slack || b.y1 > h + slack) problems.push(`${where}: "${b.text}" outside the picture`);
          }
          for (let i = 0; i < boxes.length; i++) {
            for (let j = i + 1; j < boxes.length; j++) {
              const a = boxes[i]!;
              const b = boxes[j]!;
              if (a.x0 + slack < b.x1 && b.x0 + slack < a.x1 && a.y0 + slack < b.y1 && b.y0 + slack < a.y1) problems.push(`${where}: "${a.text}" overlaps "${b.text}"`);
            }
          }
          const headings = await page.locator('g[data-panel] > text').first().textContent();
          if (!new RegExp(`^${measurand}[ :]`).test(headings ?? '')) problems.push(`${where}: the first panel heading "${headings}" does not name ${measurand}`);
        }
      }
    }
    expect(charts).toBeGreaterThan(10);
    expect(problems).toEqual([]);
  });
});

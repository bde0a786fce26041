/**
 * Debian's Chromium for the board's browser tests (playwright-core), in a private profile: launch, sign in, and the
 * one way to wait — for a state of the page, bounded generously, never for a time.
 */
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { chromium, type BrowserContext, type Page } from 'playwright-core';
import { expect } from 'vitest';

export const CHROMIUM = '/usr/bin/chromium';
export const HAVE_CHROMIUM = existsSync(CHROMIUM);

/** The machine is shared and small: give the page time, but fail rather than hang. */
export const poll = <T>(read: () => T | Promise<T>) => expect.poll(read, { timeout: 120_000, interval: 100 });

export interface BoardBrowser {
  readonly context: BrowserContext;
  /** Console errors and page errors of every page opened through `open`. */
  readonly problems: string[];
  open(): Promise<Page>;
  close(): Promise<void>;
}

export async function launchBoardBrowser(viewport = { width: 1280, height: 900 }): Promise<BoardBrowser> {
  const profile = mkdtempSync(join(tmpdir(), 'wearshift-chromium-'));
  const context = await chromium.launchPersistentContext(profile, {
    executablePath: CHROMIUM,
    headless: true,
    args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-quic', '--no-first-run', '--disable-component-update', '--disable-sync'],
    viewport,
  });
  const problems: string[] = [];
  return {
    context,
    problems,
    async open() {
      const page = await context.newPage();
      page.on('pageerror', (e) => problems.push(`page error: ${e.message}`));
      return page;
    },
    async close() {
      await context.close();
      rmSync(profile, { recursive: true, force: true });
    },
  };
}

/** Signs in on the board at `url` and waits until its live feed is connected. */
export async function signIn(page: Page, url: string, token: string, name: string): Promise<void> {
  await page.goto(url);
  await page.locator('#token').fill(token);
  await page.locator('#name').fill(name);
  await page.locator('#token').press('Enter');
  await page.locator('#live[data-live="on"]').waitFor({ timeout: 120_000 });
}

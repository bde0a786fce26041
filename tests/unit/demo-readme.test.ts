/**
 * demo/README.md says what the demo does: how long a run takes follows from the paced feed (`--feed-seconds`, whose
 * default it names), and `--keep-open` is described with every token it prints. Measured here on two shared cores: a
 * whole run took 31 s, "Done in 30.5 s"; the check below ties the words to the default, not to a machine's speed.
 */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { formatKeepOpen } from '../../src/demo/report.ts';
import { DEMO_DEFAULTS } from '../../src/demo/runDemo.ts';

const demoReadme = readFileSync('demo/README.md', 'utf8').replace(/\s+/g, ' ');

describe('demo/README.md', () => {
  it('states the run time the paced feed gives, with the feed default it rests on', () => {
    expect(DEMO_DEFAULTS.feedSeconds).toBe(30);
    expect(demoReadme).toContain(`about half a minute (most of it the paced feed, \`--feed-seconds\`, default ${DEMO_DEFAULTS.feedSeconds};`);
    expect(demoReadme).toContain(`\`--feed-seconds N\` (default ${DEMO_DEFAULTS.feedSeconds})`);
    expect(demoReadme).not.toMatch(/about 40 seconds/);
  });

  it('names every token --keep-open prints, in demo/README.md and in the README', () => {
    const printed = formatKeepOpen({ apiUrl: 'http://127.0.0.1:1', board: true, viewerToken: 'v', responderToken: 'r' })
      .map((line) => /^(\w+) token:/.exec(line)?.[1])
      .filter((label): label is string => label !== undefined)
      .map((label) => `${label.toLowerCase()} token`);
    expect(printed).toEqual(['viewer token', 'responder token']);
    const keepOpen = /`--keep-open` \(([^)]*)\)/.exec(demoReadme)?.[1] ?? '';
    for (const token of printed) expect(keepOpen).toContain(token);
    const readme = readFileSync('README.md', 'utf8').replace(/\s+/g, ' ');
    for (const token of printed) expect(readme).toMatch(new RegExp(`--keep-open\` leaves the board running and prints its address, [^.]*${token}`));
  });
});

/** `channels.webhooks[].timeoutMs`: a default, and an upper bound refused when the configuration is read. */
import { describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { WEBHOOK_TIMEOUT_MAX_MS } from '../../src/domain/escalationConfig.ts';

const withTimeout = (timeoutMs?: number) => `
channels:
  webhooks:
    - { name: ops, url: 'https://ops.plant.example/hooks/oil', secrets: [OPS_WEBHOOK_SECRET] }
    - { name: historian, url: 'https://historian.plant.example/hooks', secrets: [HISTORIAN_WEBHOOK_SECRET]${timeoutMs === undefined ? '' : `, timeoutMs: ${timeoutMs}`} }
`;

function refusal(text: string): string {
  try {
    parseConfig(text, 'site.yaml');
  } catch (e) {
    return (e as Error).message;
  }
  return 'accepted';
}

describe('webhook timeoutMs', () => {
  it('defaults to 10 s and takes anything up to 5 minutes', () => {
    expect(WEBHOOK_TIMEOUT_MAX_MS).toBe(300_000);
    expect(parseConfig(withTimeout()).channels.webhooks.map((w) => w.timeoutMs)).toEqual([10_000, 10_000]);
    expect(parseConfig(withTimeout(120_000)).channels.webhooks[1]!.timeoutMs).toBe(120_000);
    expect(parseConfig(withTimeout(300_000)).channels.webhooks[1]!.timeoutMs).toBe(300_000);
  });

  it('refuses more than 5 minutes when the configuration is read, naming the endpoint’s field and the bound', () => {
    for (const timeoutMs of [300_001, 3_600_000]) {
      const message = refusal(withTimeout(timeoutMs));
      expect(message).toMatch(/^site\.yaml: invalid configuration/);
      expect(message).toContain('channels.webhooks.1.timeoutMs: timeoutMs is at most 300000 (5 minutes)');
      expect(message).not.toContain('channels.webhooks.0');
    }
  });

  it('still refuses zero, negative and fractional timeouts', () => {
    for (const timeoutMs of [0, -1, 1500.5]) expect(refusal(withTimeout(timeoutMs))).toContain('channels.webhooks.1.timeoutMs');
  });
});

import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { ackLinkUrl, signAckLink, verifyAckLink } from '../../src/notify/ackLink.ts';

const secret = 'current-secret-0123456789abcdef';
const oldSecret = 'previous-secret-fedcba9876543210';
const claims = { incidentId: 'INC-2026-0007', recipient: 'oncall@plant.example', expiresAt: new Date('2026-03-04T08:00:00Z') };
const before = new Date('2026-03-02T12:00:00Z');

describe('acknowledgement links', () => {
  it('verifies a link it signed and gives back its claims', () => {
    const token = signAckLink(claims, secret);
    expect(token).toMatch(/^[A-Za-z0-9_-]+\.[A-Za-z0-9_-]{43}$/);
    expect(verifyAckLink(token, secret, before)).toEqual({ ok: true, claims });
  });

  it('stops working at the expiry second, and says "expired" only for a genuine link', () => {
    const token = signAckLink(claims, secret);
    expect(verifyAckLink(token, secret, new Date(claims.expiresAt.getTime() - 1000)).ok).toBe(true);
    expect(verifyAckLink(token, secret, claims.expiresAt)).toEqual({ ok: false, reason: 'expired' });
    expect(verifyAckLink(token, 'some-other-secret-0123456789', new Date('2030-01-01T00:00:00Z'))).toEqual({ ok: false, reason: 'tampered' });
  });

  it('accepts links signed with an older secret during a rotation, and refuses them once it is dropped', () => {
    const token = signAckLink(claims, oldSecret);
    expect(verifyAckLink(token, [secret, oldSecret], before).ok).toBe(true);
    expect(verifyAckLink(token, [secret], before)).toEqual({ ok: false, reason: 'tampered' });
  });

  it('refuses a link with the payload swapped for another incident', () => {
    const token = signAckLink(claims, secret);
    const other = signAckLink({ ...claims, incidentId: 'INC-2026-0008' }, secret);
    const forged = `${other.split('.')[0]}.${token.split('.')[1]}`;
    expect(verifyAckLink(forged, secret, before)).toEqual({ ok: false, reason: 'tampered' });
  });

  it('refuses every token with any one character changed', () => {
    const token = signAckLink(claims, secret);
    const alphabet = 'ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789-_.';
    fc.assert(
      fc.property(fc.nat(token.length - 1), fc.constantFrom(...alphabet), (at, c) => {
        fc.pre(token[at] !== c);
        const changed = token.slice(0, at) + c + token.slice(at + 1);
        expect(verifyAckLink(changed, secret, before).ok).toBe(false);
      }),
      { numRuns: 2000 },
    );
  });

  it('calls broken tokens malformed', () => {
    const token = signAckLink(claims, secret);
    for (const bad of ['', 'abc', `${token}.x`, `${token.split('.')[0]}.`, 'a b.c', `${token.split('.')[0]}.${token.split('.')[1]?.slice(0, 20)}`]) {
      expect(verifyAckLink(bad, secret, before), bad).toEqual({ ok: false, reason: 'malformed' });
    }
  });

  it('refuses secrets too short to resist guessing', () => {
    expect(() => signAckLink(claims, 'short')).toThrow(/at least 16 characters/);
    expect(() => verifyAckLink('a.b', [], before)).toThrow(/at least one/);
  });

  it('builds the link under the public base address', () => {
    expect(ackLinkUrl('https://wearshift.plant.example/', 'abc.def')).toBe('https://wearshift.plant.example/ack/abc.def');
  });
});

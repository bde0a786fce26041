/**
 * The key the per-address bounds of the HTTP API count a client under (`addressKey`): an IPv6 address by its /64,
 * whatever its spelling (`::` compression, upper case, leading zeros, a trailing dotted part, a zone id); an IPv4
 * address, and the IPv4-mapped IPv6 form of it, as that IPv4 address. The failed-authentication window and the
 * sockets-per-address counter key on it: every address of one /64 shares one bound, another /64 has its own. The
 * guard's clock is injected; the counter is fed sockets through the server's 'connection' event, no network.
 */
import { EventEmitter } from 'node:events';
import { createServer } from 'node:http';
import type { Socket } from 'node:net';
import { describe, expect, it } from 'vitest';
import { addressKey, addressMatcher, FailedAuthGuard, limitConnectionsPerAddress } from '../../src/http/addressLimits.ts';

describe('addressKey', () => {
  it('gives every spelling of the addresses of one IPv6 /64 the same key', () => {
    const spellings = [
      '2001:db8:0:7::1',
      '2001:db8::7:0:0:0:1',
      '2001:0db8:0000:0007:0000:0000:0000:0001',
      '2001:DB8:0:7::1',
      '2001:db8:0:7:ffff:ffff:ffff:ffff',
      '2001:db8:0:7::',
      '2001:db8:0:7:a:b:c:d',
      '2001:db8:0:7::192.0.2.1',
      '2001:db8:0:7::1%eth0',
      '2001:db8:0:7:0:0:0:0',
    ];
    expect(new Set(spellings.map(addressKey))).toEqual(new Set(['2001:db8:0:7::/64']));
  });

  it('gives addresses of different /64s different keys', () => {
    const keys = ['2001:db8:0:7::1', '2001:db8:0:8::1', '2001:db8:1:7::1', '2001:db9:0:7::1', 'fe80::1', '::1', 'fd00::1'].map(addressKey);
    expect(new Set(keys).size).toBe(keys.length);
    expect(addressKey('fe80::1')).toBe('fe80:0:0:0::/64');
    expect(addressKey('::1')).toBe('0:0:0:0::/64');
    expect(addressKey('::')).toBe('0:0:0:0::/64');
    // The /64 boundary: the fourth group still counts, the fifth no longer does.
    expect(addressKey('2001:db8:0:7:1::')).toBe(addressKey('2001:db8:0:7:2::'));
    expect(addressKey('2001:db8:0:7::')).not.toBe(addressKey('2001:db8:0:6:ffff::'));
  });

  it('drops the zone id: a link-local address counts under its /64 whichever interface it came in on', () => {
    expect(addressKey('fe80::1%eth0')).toBe('fe80:0:0:0::/64');
    expect(addressKey('fe80::abcd:1%2')).toBe('fe80:0:0:0::/64');
    expect(addressKey('FE80::1%lo')).toBe(addressKey('fe80::2'));
  });

  it('keeps IPv4 addresses one by one, and counts an IPv4-mapped IPv6 address as its IPv4 address', () => {
    expect(addressKey('192.0.2.1')).toBe('192.0.2.1');
    expect(addressKey('192.0.2.2')).toBe('192.0.2.2');
    expect(addressKey('::ffff:192.0.2.1')).toBe('192.0.2.1');
    expect(addressKey('::FFFF:192.0.2.1')).toBe('192.0.2.1');
    expect(addressKey('0:0:0:0:0:ffff:c000:201')).toBe('192.0.2.1');
    expect(addressKey('::ffff:c000:0201')).toBe('192.0.2.1');
    expect(addressKey('::ffff:192.0.2.1%eth0')).toBe('192.0.2.1');
    expect(addressKey('::ffff:127.0.0.1')).not.toBe(addressKey('::ffff:127.0.0.2'));
    // Not mapped: an IPv4-compatible or a translated address is an IPv6 address like any other.
    expect(addressKey('::192.0.2.1')).toBe('0:0:0:0::/64');
    expect(addressKey('64:ff9b::192.0.2.1')).toBe('64:ff9b:0:0::/64');
  });

  it('returns anything else unchanged, and a key as it is', () => {
    for (const text of ['', 'unknown', '2001:db8::/64 ', 'fe80::1%', '1.2.3.4%eth0']) expect(addressKey(text)).toBe(text);
    for (const address of ['2001:db8:0:7::1', '::ffff:192.0.2.1', '192.0.2.1', '::']) expect(addressKey(addressKey(address))).toBe(addressKey(address));
  });
});

describe('FailedAuthGuard', () => {
  const WINDOW_MS = 60_000;

  it('counts the failures of every address of one /64 in one window, and those of another /64 apart', () => {
    let now = Date.parse('2026-03-02T06:00:00Z');
    const guard = new FailedAuthGuard({ max: 3, windowMs: WINDOW_MS, addresses: 10, now: () => now });
    guard.failed('2001:db8:0:7::1');
    guard.failed('2001:db8:0:7::2');
    expect(guard.lockedFor('2001:db8:0:7::3')).toBeUndefined();
    guard.failed('2001:0DB8:0:7:abcd::99%eth0');
    for (const address of ['2001:db8:0:7::1', '2001:db8:0:7::ffff', '2001:db8::7:1:2:3:4']) expect(guard.lockedFor(address)).toBe(WINDOW_MS / 1000);
    expect(guard.lockedFor('2001:db8:0:8::1')).toBeUndefined();
    // Half the window later the whole /64 still waits, for the rest of it; once it has passed, it is served again.
    now += WINDOW_MS / 2;
    expect(guard.lockedFor('2001:db8:0:7::4')).toBe(WINDOW_MS / 2000);
    now += WINDOW_MS / 2;
    expect(guard.lockedFor('2001:db8:0:7::4')).toBeUndefined();
  });

  it('counts IPv4 addresses one by one, the mapped form with its IPv4 address', () => {
    const guard = new FailedAuthGuard({ max: 2, windowMs: WINDOW_MS, addresses: 10, now: () => 0 });
    guard.failed('192.0.2.1');
    guard.failed('::ffff:192.0.2.1');
    expect(guard.lockedFor('192.0.2.1')).toBe(WINDOW_MS / 1000);
    expect(guard.lockedFor('::ffff:192.0.2.1')).toBe(WINDOW_MS / 1000);
    expect(guard.lockedFor('192.0.2.2')).toBeUndefined();
  });

  it('remembers a bounded number of /64s, however many addresses of each failed', () => {
    const guard = new FailedAuthGuard({ max: 2, windowMs: WINDOW_MS, addresses: 2, now: () => 0 });
    // Many addresses of one /64 take one entry: the other /64 that failed first is not forgotten.
    guard.failed('2001:db8:0:1::1');
    guard.failed('2001:db8:0:1::2');
    for (let i = 1; i <= 50; i++) guard.failed(`2001:db8:0:2::${i.toString(16)}`);
    expect(guard.lockedFor('2001:db8:0:1::3')).toBe(WINDOW_MS / 1000);
    expect(guard.lockedFor('2001:db8:0:2::')).toBe(WINDOW_MS / 1000);
  });
});

describe('limitConnectionsPerAddress', () => {
  /** A socket as far as the counter looks at it: its peer, and whether it was closed. */
  function socketFrom(remoteAddress: string): Socket & { refused: boolean } {
    const socket = Object.assign(new EventEmitter(), { remoteAddress, refused: false });
    return Object.assign(socket, { destroy: () => ((socket.refused = true), socket) }) as unknown as Socket & { refused: boolean };
  }

  /** A server with the bound: connecting from an address hands it a socket, which says whether it was refused. */
  function limitedServer(max: number, exact?: (address: string) => boolean): (address: string) => Socket & { refused: boolean } {
    const server = createServer();
    limitConnectionsPerAddress(server, max, exact);
    return (address) => {
      const socket = socketFrom(address);
      server.emit('connection', socket);
      return socket;
    };
  }

  it('counts the sockets of every address of one /64 together, and those of another /64 and of IPv4 peers apart', () => {
    const connect = limitedServer(2);
    const first = connect('2001:db8:0:7::1');
    connect('2001:db8:0:7::2');
    // A third address of the same /64 is closed at once, however it is spelled.
    expect(connect('2001:db8:0:7::3').refused).toBe(true);
    expect(connect('2001:DB8:0:7:ffff::1%eth0').refused).toBe(true);
    // Another /64 and IPv4 peers are served.
    expect(connect('2001:db8:0:8::1').refused).toBe(false);
    expect(connect('192.0.2.1').refused).toBe(false);
    expect(connect('::ffff:192.0.2.1').refused).toBe(false);
    // The mapped form is its IPv4 address: a third socket of 192.0.2.1 is refused, 192.0.2.2 is not.
    expect(connect('192.0.2.1').refused).toBe(true);
    expect(connect('192.0.2.2').refused).toBe(false);
    // A socket of the /64 closed makes room for one more, from any address of it.
    first.emit('close');
    expect(connect('2001:db8:0:7::99').refused).toBe(false);
    expect(connect('2001:db8:0:7::100').refused).toBe(true);
  });

  it('counts each trusted proxy by its own address, not with the rest of its /64; other peers of that /64 as before', () => {
    const connect = limitedServer(2, addressMatcher(['2001:db8:0:9::10', '2001:db8:0:9::11', '10.0.0.0/8']));
    // Two proxies of one /64: two sockets each.
    for (const proxy of ['2001:db8:0:9::10', '2001:db8:0:9::11']) {
      expect(connect(proxy).refused).toBe(false);
      expect(connect(proxy).refused).toBe(false);
      expect(connect(proxy).refused).toBe(true);
    }
    // Another address of that /64 is no proxy: it has the /64's own allowance, which the proxies do not use.
    expect(connect('2001:db8:0:9::12').refused).toBe(false);
    expect(connect('2001:db8:0:9::13').refused).toBe(false);
    expect(connect('2001:db8:0:9::14').refused).toBe(true);
    // A range: each of its addresses by itself (IPv4 is counted per address anyway), the mapped form too.
    expect(connect('10.1.2.3').refused).toBe(false);
    expect(connect('::ffff:10.1.2.3').refused).toBe(false);
    expect(connect('10.1.2.3').refused).toBe(true);
  });
});

describe('addressMatcher', () => {
  it('matches addresses and CIDR ranges of both families, IPv4-mapped and zoned spellings, and nothing else', () => {
    const trusted = addressMatcher(['192.0.2.7', '10.0.0.0/8', 'fd00::/8', '2001:db8::1']);
    expect(['192.0.2.7', '::ffff:192.0.2.7', '10.255.0.1', 'fd12:3456::1', '2001:db8::1', '2001:DB8:0:0:0:0:0:1', 'fd00::1%eth0'].map(trusted)).toEqual([true, true, true, true, true, true, true]);
    expect(['192.0.2.8', '11.0.0.1', 'fe80::1', '2001:db8::2', '', 'unknown'].map(trusted)).toEqual([false, false, false, false, false, false]);
    expect(addressMatcher([])('10.0.0.1')).toBe(false);
  });
});

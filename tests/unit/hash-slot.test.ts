/**
 * Hash slots and partition tags. The CRC16 check value is the one the Redis Cluster specification gives for its
 * slot function ("Keys distribution model": CRC16 of "123456789" is 0x31C3); hash-tag rules from the same section.
 * The slots are also checked against a real cluster's CLUSTER KEYSLOT in tests/integration/cluster.test.ts.
 */
import { describe, expect, it } from 'vitest';
import { crc16, HASH_SLOTS, hashSlot } from '../../src/redis/hashSlot.ts';
import { alignedTag, Partitions } from '../../src/redis/keys.ts';

describe('hashSlot', () => {
  it('uses the CRC16 of the Redis Cluster specification', () => {
    expect(crc16(Buffer.from('123456789'))).toBe(0x31c3);
  });

  it('hashes only the hash tag when there is a non-empty one', () => {
    expect(hashSlot('{user1000}.following')).toBe(hashSlot('{user1000}.followers'));
    expect(hashSlot('{user1000}.following')).toBe(hashSlot('user1000'));
    // An empty tag does not count: the whole key is hashed.
    expect(hashSlot('foo{}{bar}')).toBe(crc16(Buffer.from('foo{}{bar}')) % HASH_SLOTS);
    // Only the first tag counts.
    expect(hashSlot('foo{{bar}}zap')).toBe(hashSlot('{bar'));
    expect(hashSlot('foo{bar}{zap}')).toBe(hashSlot('bar'));
  });
});

describe('partition tags', () => {
  it('put partition p in the p-th slice of the slot space', () => {
    for (const count of [2, 3, 12, 64, 257]) {
      const partitions = new Partitions('{wearshift}', count);
      const slots = partitions.all().map((p) => hashSlot(partitions.tag(p)));
      slots.forEach((slot, p) => {
        expect(slot).toBeGreaterThanOrEqual(Math.ceil((p * HASH_SLOTS) / count));
        expect(slot).toBeLessThan(Math.ceil(((p + 1) * HASH_SLOTS) / count));
      });
    }
  });

  it('spread evenly over shards with equal contiguous slot ranges', () => {
    const partitions = new Partitions('{lab}', 48);
    for (const shards of [2, 3, 4, 6]) {
      const held = Array.from({ length: shards }, () => 0);
      for (const p of partitions.all()) held[Math.floor((hashSlot(partitions.tag(p)) * shards) / HASH_SLOTS)]! += 1;
      expect(Math.max(...held) - Math.min(...held)).toBeLessThanOrEqual(1);
    }
  });

  it('keep the prefix as the tag with one partition, and are stable', () => {
    expect(new Partitions('{wearshift}', 1).tag(0)).toBe('{wearshift}');
    expect(alignedTag('wearshift', 3, 12)).toBe(new Partitions('{wearshift}', 12).tag(3));
    expect(() => alignedTag('wearshift', 12, 12)).toThrow(RangeError);
  });
});

/**
 * Key layout. Components are spread over N partitions by a hash of their identity; every key of a partition carries
 * the partition's hash tag, so the Lua scripts, which touch a component's keys, its group's share in the partition
 * and the partition's incident records and outbox at once, stay within one Redis Cluster slot, while the cluster
 * spreads the partitions over its shards. With one partition (the default) the tag is the configured prefix itself
 * (`{wearshift}`), as on a single Redis.
 *
 * The tag of partition p is chosen so that its hash slot lies in the p-th of N equal slices of the 16 384 slots
 * (`{wearshift/p}`, or `{wearshift/p-k}` with the least k that lands there). A cluster whose shards serve
 * contiguous, near-equal slot ranges (what `redis-cli --cluster create` and rebalancing make) then holds N/shards
 * partitions on each shard, give or take one, instead of the uneven share that tags hashed at random would give.
 *
 * Changing the number of partitions moves most components to another partition: stop the workers and import the
 * results again from their source files under a new prefix; see the README ("Sharding on Redis Cluster").
 */
import { createHash } from 'node:crypto';
import { componentKey } from '../domain/event.ts';
import { crc16, crc16Byte, HASH_SLOTS, hashSlot } from './hashSlot.ts';

export const DEFAULT_PREFIX = '{wearshift}';

export interface ComponentRefLike {
  readonly unit: string;
  readonly component: string;
}

/** The prefix without its braces, e.g. "wearshift". */
function inner(prefix: string): string {
  const m = /^\{([^{}]+)\}$/.exec(prefix);
  return m ? m[1]! : prefix.replace(/[{}]/g, '');
}

export class Partitions {
  readonly count: number;
  private readonly prefix: string;
  private readonly tags: string[] = [];

  constructor(prefix: string = DEFAULT_PREFIX, count = 1) {
    if (!(Number.isInteger(count) && count >= 1 && count <= 1024)) throw new RangeError(`partitions must be a whole number from 1 to 1024, got ${count}`);
    this.count = count;
    this.prefix = prefix;
  }

  /** The hash tag of partition `p` (the configured prefix when there is one partition). */
  tag(p: number): string {
    if (this.count === 1) return this.prefix;
    return (this.tags[p] ??= alignedTag(inner(this.prefix), p, this.count));
  }

  /** The partition of a component: stable for its identity. */
  of(ref: ComponentRefLike): number {
    if (this.count === 1) return 0;
    const digest = createHash('sha1').update(componentKey(ref)).digest();
    return digest.readUInt32BE(0) % this.count;
  }

  all(): number[] {
    return Array.from({ length: this.count }, (_, i) => i);
  }

  /** The tag of queues that are not partitioned (notifications, escalations). */
  sharedTag(): string {
    return this.count === 1 ? this.prefix : `{${inner(this.prefix)}/shared}`;
  }
}

/** `{name/p}` or `{name/p-k}`: the first whose slot falls in the p-th of `count` equal slices of the slot space. */
export function alignedTag(name: string, p: number, count: number): string {
  if (!(Number.isInteger(p) && p >= 0 && p < count)) throw new RangeError(`partition ${p} is not one of 0…${count - 1}`);
  const from = Math.ceil((p * HASH_SLOTS) / count);
  const to = Math.ceil(((p + 1) * HASH_SLOTS) / count);
  const plain = `{${name}/${p}}`;
  const inSlice = (slot: number) => slot >= from && slot < to;
  if (inSlice(hashSlot(plain))) return plain;
  // The CRC of "name/p-" once, then only the digits of k (about `count` tries on average).
  const head = crc16(Buffer.from(`${name}/${p}-`, 'utf8'));
  for (let k = 1; ; k++) {
    const digits = String(k);
    let crc = head;
    for (let i = 0; i < digits.length; i++) crc = crc16Byte(crc, digits.charCodeAt(i));
    if (inSlice(crc % HASH_SLOTS)) return `{${name}/${p}-${k}}`;
  }
}

/** The field of a component's revisions hash that holds their common group and lab. */
export const COMMON_FIELD = '*';

/** Keys of one component, in its partition. */
export function componentKeys(tag: string, ref: ComponentRefLike) {
  const c = `${tag}:c:${encodeURIComponent(ref.unit)}/${encodeURIComponent(ref.component)}`;
  return {
    /**
     * hash `sampleId␟revision` → `receivedAt|stored sample` (sampleCodec.ts): every revision ever stored; and the field
     * `*` → `group,lab`, the common group and lab the stored samples refer to.
     */
    revisions: `${c}:rev`,
    /** hash sampleId → `revision|time|unitHours|share`: the revision in force, its position and its population share. */
    winners: `${c}:win`,
    /** sorted set sampleId by sampling time of the revision in force. */
    order: `${c}:ord`,
    /** hash: mark, done, dirty, later (changes since the input an evaluation read), latest checkpoint, sparse checkpoints (cp|…), incidents (compact, compactText.ts), version, marks, baseline shares (bl|…), group. */
    evaluation: `${c}:ev`,
    /**
     * An earlier layout's hash `month|field` → number of the component's own shares of its group's month buckets; they
     * are now read from the winners' shares and the baseline entries (bl|…), and the commit deletes this key.
     */
    own: `${c}:own`,
    /** hash `time|sampleId` → step JSON: the steps with findings (the latest ones). */
    steps: `${c}:steps`,
    /** sorted set incident id by opening time: the component's incidents on record. */
    incidents: `${c}:inc`,
    lock: `${c}:lock`,
  };
}

/** Keys of one partition. */
export function partitionKeys(tag: string) {
  return {
    /** hash component key → {unit, component, group}. */
    registry: `${tag}:components`,
    /** hash incident id → incident JSON. */
    records: `${tag}:inc:records`,
    /** sorted sets of open (by severity and age) and closed (by closing time) incident ids. */
    open: `${tag}:inc:open`,
    closed: `${tag}:inc:closed`,
    /** list of effects waiting to be handed to the queues, and the claimed ones. */
    outbox: `${tag}:inc:outbox`,
    outboxClaimed: `${tag}:inc:outbox:claimed`,
    /** Group keys live under this prefix + group name: `…:v` month versions, `…:m:<month>` buckets, `…:h` horizons. */
    groupPrefix: `${tag}:g:`,
  };
}

/**
 * The counter that numbers live results across all partitions' results queues as the producer enqueues them (their
 * arrival order, arrivalOrder.ts), under the shared tag. Used only with more than one partition.
 */
export function arrivalCounterKey(partitions: Partitions): string {
  return `${partitions.sharedTag()}:results:arrival`;
}

export function groupKeys(tag: string, group: string) {
  const g = `${tag}:g:${encodeURIComponent(group)}`;
  return {
    /** hash month → version: a month bucket changed when its version did. */
    versions: `${g}:v`,
    bucketPrefix: `${g}:m:`,
    bucket: (month: string) => `${g}:m:${month}`,
    /** sorted set of the partition's components of the group by the sampling time they were evaluated up to. */
    horizons: `${g}:h`,
  };
}

export { componentKey };

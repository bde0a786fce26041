/**
 * The alarm-flood counts in Redis (src/notify/floodControl.ts), shared by every worker process: per target and
 * window, the position of each message (a redelivered job keeps its position) and the messages held back. Keys
 * expire a day after their window, long after its summary went out.
 */
import { floodKey, type FloodTarget, type HeldMessage } from '../notify/floodControl.ts';
import type { RedisConnection } from './redisStore.ts';

const KEEP_S = 24 * 3600;

export class FloodLedger {
  constructor(
    private readonly redis: RedisConnection,
    private readonly prefix: string,
  ) {}

  /** The 1-based position of message `messageKey` among the target's messages in the window. */
  async position(target: FloodTarget, window: number, messageKey: string): Promise<number> {
    const k = this.keys(target, window);
    const known = await this.redis.hget(k.positions, messageKey);
    if (known !== null) return Number(known);
    const n = await this.redis.incr(k.count);
    const set = await this.redis.hsetnx(k.positions, messageKey, String(n));
    await this.redis.expire(k.count, KEEP_S);
    await this.redis.expire(k.positions, KEEP_S);
    // Another delivery of the same message got there first: its position stands.
    return set === 1 ? n : Number(await this.redis.hget(k.positions, messageKey));
  }

  /** Records a held-back message once (by its key). */
  async hold(target: FloodTarget, window: number, messageKey: string, message: HeldMessage): Promise<void> {
    const k = this.keys(target, window);
    await this.redis.hset(k.held, messageKey, JSON.stringify(message));
    await this.redis.expire(k.held, KEEP_S);
  }

  async held(target: FloodTarget, window: number): Promise<HeldMessage[]> {
    const values = await this.redis.hvals(this.keys(target, window).held);
    return values.map((v) => JSON.parse(v) as HeldMessage);
  }

  private keys(target: FloodTarget, window: number) {
    // Under the prefix's hash tag, as every key of the program.
    const tag = `${this.prefix}:flood:${floodKey(target, window)}`;
    return { count: `${tag}:count`, positions: `${tag}:positions`, held: `${tag}:held` };
  }
}

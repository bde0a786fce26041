/**
 * Which notifications have been delivered, or withdrawn, shared by every worker process. BullMQ drops a job id's memory when the
 * completed job is removed (queue option `keepCompleted`); an effect handed to the notify queue again after that
 * (an outbox relay that died between handing over and confirming, a re-run evaluation) would become a new job and
 * a second message. The notify processor asks this ledger first and records a delivery as soon as the channel took
 * it, so only a message in flight when its worker died can go out twice (with the same idempotency key).
 *
 * A message withdrawn before it went out (its incident changed while it waited, recorded on the incident) is noted
 * here too, so that no later attempt sends it, whatever the incident says by then.
 */
import type { RedisConnection } from './connection.ts';

/** How long a delivery is remembered: a week, far longer than any outbox claim, retry series or replay. */
export const DELIVERED_KEEP_S = 7 * 24 * 3600;

export class DeliveryLedger {
  constructor(
    private readonly redis: RedisConnection,
    private readonly prefix: string,
    private readonly keepS: number = DELIVERED_KEEP_S,
  ) {}

  /** True when the message with this idempotency key was delivered before. */
  async delivered(messageKey: string): Promise<boolean> {
    return (await this.redis.exists(this.key(messageKey))) === 1;
  }

  /** Records the delivery of the message with this idempotency key. */
  async record(messageKey: string, at: number): Promise<void> {
    await this.redis.set(this.key(messageKey), String(at), 'EX', this.keepS);
  }

  /**
   * Notes that an attempt of the message begins (before the channel is called), unless an earlier one is noted: an
   * attempt that ends without the channel's answer (its worker stopped, the receiver did not answer in time) leaves
   * the note, so a later judgement knows the message may have gone out. Returns whether this call made the note.
   */
  async attempting(messageKey: string, at: number): Promise<boolean> {
    return (await this.redis.set(this.key(messageKey, 'attempt'), String(at), 'EX', this.keepS, 'NX')) === 'OK';
  }

  /** When an attempt of the message began that may have reached its target (see `attempting`); undefined when none. */
  async attempted(messageKey: string): Promise<number | undefined> {
    const at = await this.redis.get(this.key(messageKey, 'attempt'));
    return at === null ? undefined : Number(at);
  }

  /** Takes back the note of `attempting`: the attempt ended with an answer that the message was not taken. */
  async notTaken(messageKey: string): Promise<void> {
    await this.redis.del(this.key(messageKey, 'attempt'));
  }

  /** Why the message with this idempotency key was withdrawn, when it was; undefined otherwise. */
  async withdrawn(messageKey: string): Promise<string | undefined> {
    return (await this.redis.get(this.key(messageKey, 'withdrawn'))) ?? undefined;
  }

  /** Notes that the message with this idempotency key is not to be sent, and why. */
  async recordWithdrawn(messageKey: string, reason: string): Promise<void> {
    await this.redis.set(this.key(messageKey, 'withdrawn'), reason, 'EX', this.keepS);
  }

  private key(messageKey: string, what: 'delivered' | 'withdrawn' | 'attempt' = 'delivered'): string {
    // Under the prefix's hash tag, as every key of the program.
    return `${this.prefix}:${what}:${messageKey}`;
  }
}

/**
 * Secure channels that hold no activated session. Any client, token holder or not, can open channels up to the
 * endpoint's connection limit without ever activating a session (or close its sessions and keep the channels), and so
 * lock everyone else out while the session quota sees nothing. A channel without an activated session is closed after
 * `idleChannelSeconds`, and one remote address holds at most `pendingChannelsPerAddress` such channels at once; a
 * client activates its session a moment after it connects, so clients behind one address that connect in turn are not
 * held back. Bookkeeping with one timer per waiting channel; the server tells it what happens.
 */
import type { OpcuaLimits } from '../domain/opcuaConfig.ts';

export interface GuardedChannel {
  readonly remoteAddress: string;
  /** Closes the channel's connection at once. */
  abruptlyInterrupt(): void;
}

export type ChannelClosing = 'idle' | 'address-full';

export class ChannelGuard<C extends GuardedChannel, S> {
  /** Channels without an activated session: their address and idle timer. */
  private readonly waiting = new Map<C, { readonly address: string; readonly timer: NodeJS.Timeout }>();
  private readonly perAddress = new Map<string, number>();
  /** Activated sessions by channel, and the channel of each. */
  private readonly sessions = new Map<C, Set<S>>();
  private readonly channelOf = new Map<S, C>();

  constructor(
    private readonly limits: Pick<OpcuaLimits, 'idleChannelSeconds' | 'pendingChannelsPerAddress'>,
    /** Told of every channel the guard closes, and why. */
    private readonly onClosing?: (why: ChannelClosing, address: string) => void,
  ) {}

  /** A new channel (or one whose last session closed): it waits for a session, or is closed when its address has too many waiting. */
  opened(channel: C): void {
    if (this.waiting.has(channel)) return;
    const address = channel.remoteAddress ?? '';
    const held = this.perAddress.get(address) ?? 0;
    if (held >= this.limits.pendingChannelsPerAddress) {
      this.close(channel, 'address-full', address);
      return;
    }
    this.perAddress.set(address, held + 1);
    const timer = setTimeout(() => {
      this.stopWaiting(channel);
      this.close(channel, 'idle', address);
    }, this.limits.idleChannelSeconds * 1000);
    timer.unref();
    this.waiting.set(channel, { address, timer });
  }

  /** A session was activated on `channel`: the channel no longer waits. */
  activated(session: S, channel: C): void {
    this.stopWaiting(channel);
    const previous = this.channelOf.get(session);
    if (previous !== undefined && previous !== channel) this.sessionClosed(session);
    this.channelOf.set(session, channel);
    (this.sessions.get(channel) ?? this.sessions.set(channel, new Set()).get(channel)!).add(session);
  }

  /** A session closed: a channel left without an activated session waits again. */
  sessionClosed(session: S): void {
    const channel = this.channelOf.get(session);
    if (channel === undefined) return;
    this.channelOf.delete(session);
    const left = this.sessions.get(channel);
    left?.delete(session);
    if (left !== undefined && left.size === 0) {
      this.sessions.delete(channel);
      this.opened(channel);
    }
  }

  /** The channel closed (by either side). */
  channelClosed(channel: C): void {
    this.stopWaiting(channel);
    for (const session of this.sessions.get(channel) ?? []) this.channelOf.delete(session);
    this.sessions.delete(channel);
  }

  /** Channels waiting for a session. */
  get waitingChannels(): number {
    return this.waiting.size;
  }

  /** Stops every timer (the server is stopping). */
  stop(): void {
    for (const { timer } of this.waiting.values()) clearTimeout(timer);
    this.waiting.clear();
    this.perAddress.clear();
  }

  private stopWaiting(channel: C): void {
    const entry = this.waiting.get(channel);
    if (entry === undefined) return;
    clearTimeout(entry.timer);
    this.waiting.delete(channel);
    const held = (this.perAddress.get(entry.address) ?? 1) - 1;
    if (held <= 0) this.perAddress.delete(entry.address);
    else this.perAddress.set(entry.address, held);
  }

  private close(channel: C, why: ChannelClosing, address: string): void {
    this.onClosing?.(why, address);
    channel.abruptlyInterrupt();
  }
}

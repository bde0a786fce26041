/**
 * Who may hold how many OPC UA sessions. Without it one viewer (or any anonymous client) could take every session
 * the server has and lock the control room out: each user name holds at most `maxSessionsPerUser` (all anonymous
 * sessions together count as one user), and viewers and anonymous sessions together leave `responderSessions`
 * free for responders. Pure bookkeeping: the server admits a session when it is activated and releases it when it
 * closes.
 */
import type { OpcuaLimits } from '../domain/opcuaConfig.ts';
import type { OpcuaRole } from './opcuaUsers.ts';

export interface SessionHolder {
  /** The user name; undefined for an anonymous session. */
  readonly userName: string | undefined;
  readonly role: OpcuaRole;
}

export type QuotaRefusal = 'server-full' | 'user-full' | 'viewers-full';

export class SessionQuota<K> {
  private readonly held = new Map<K, SessionHolder>();

  constructor(private readonly limits: Pick<OpcuaLimits, 'maxSessions' | 'responderSessions' | 'maxSessionsPerUser'>) {}

  /**
   * Admits `session` for `holder`, or says why not. A session activated again by the same user keeps its place; one
   * activated by another user is counted anew.
   */
  admit(session: K, holder: SessionHolder): QuotaRefusal | undefined {
    const before = this.held.get(session);
    if (before !== undefined && before.userName === holder.userName && before.role === holder.role) return undefined;
    let all = 0;
    let sameUser = 0;
    let viewers = 0;
    for (const [key, h] of this.held) {
      if (key === session) continue;
      all += 1;
      if (h.userName === holder.userName) sameUser += 1;
      if (h.role !== 'responder') viewers += 1;
    }
    if (all >= this.limits.maxSessions) return 'server-full';
    if (sameUser >= this.limits.maxSessionsPerUser) return 'user-full';
    if (holder.role !== 'responder' && viewers >= this.limits.maxSessions - this.limits.responderSessions) return 'viewers-full';
    this.held.set(session, holder);
    return undefined;
  }

  release(session: K): void {
    this.held.delete(session);
  }

  get size(): number {
    return this.held.size;
  }
}

/** Keeps a component's evaluation lock renewed at a third of its lifetime while an evaluation runs. */
import type { ComponentStore, Lease } from './ports.ts';

export interface Renewal {
  /** The lock was lost (expired and taken by another worker): the evaluation must not commit. */
  readonly lost: boolean;
  stop(): void;
}

export function keepRenewed(store: Pick<ComponentStore, 'renew'>, lease: Lease, ttl: number): Renewal {
  const state = { lost: false };
  const timer = setInterval(() => {
    store.renew(lease, ttl).then(
      (ok) => {
        if (!ok) state.lost = true;
      },
      () => {
        // Redis unreachable: the lock may lapse; the fenced commit refuses to write if it did.
      },
    );
  }, Math.max(1000, Math.floor(ttl / 3)));
  timer.unref();
  return {
    get lost() {
      return state.lost;
    },
    stop: () => clearInterval(timer),
  };
}

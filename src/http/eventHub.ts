/**
 * In-process publish/subscribe for live updates: the processors publish incident changes and new results, and every
 * open `GET /v1/events` stream (the board) receives them. Delivery is best effort and in memory: a page that
 * reconnects reloads the incident list, so nothing depends on an event arriving. Across processes (`wearshift
 * worker` and `wearshift api` apart), a bridge forwards Redis pub/sub messages into the API process's hub.
 */
import { incidentLiveEvent, type LiveEvent } from '../pipeline/liveEvent.ts';
import type { IncidentRoutesStore } from './incidentRoutes.ts';

export type { LiveEvent };

export type LiveListener = (event: LiveEvent, id: number) => void;

export interface EventHub {
  /** Hands the event to every subscriber now; a subscriber that throws does not keep it from the others. */
  publish(event: LiveEvent): void;
  /** Returns the function that ends the subscription. */
  subscribe(listener: LiveListener): () => void;
  readonly subscribers: number;
}

export interface EventHubOptions {
  /** Told about a subscriber that threw. Default: ignored (the subscriber's own stream handles its errors). */
  onListenerError?: (error: unknown) => void;
}

export function createEventHub(options: EventHubOptions = {}): EventHub {
  const listeners = new Set<LiveListener>();
  let sequence = 0;
  return {
    publish(event) {
      const id = ++sequence;
      for (const listener of [...listeners]) {
        try {
          listener(event, id);
        } catch (e) {
          options.onListenerError?.(e);
        }
      }
    },
    subscribe(listener) {
      // A wrapper per call, so that subscribing the same function twice gives two independent subscriptions.
      const entry: LiveListener = (event, id) => listener(event, id);
      listeners.add(entry);
      return () => {
        listeners.delete(entry);
      };
    },
    get subscribers() {
      return listeners.size;
    },
  };
}

/**
 * The incident store with every operator action (acknowledge, shelve, resolve, ...) announced, so that every open
 * board sees what one responder did. `publish` is the hub's (one process) or the Redis live channel's (several API
 * processes, each bridging the channel into its own hub). The event is made as every incident event is
 * (src/pipeline/liveEvent.ts): a closed incident's says how it was closed. For `incidentRoutes`:
 * `{ store: announcingActions(store, (e) => hub.publish(e)) }`.
 */
export function announcingActions(store: IncidentRoutesStore, publish: (event: LiveEvent) => void): IncidentRoutesStore {
  return {
    get: (incidentId) => store.get(incidentId),
    list: (filter) => store.list(filter),
    page: (filter, after, options) => store.page(filter, after, options),
    async applyAction(action) {
      const result = await store.applyAction(action);
      const { incident } = result;
      const last = incident.timeline[incident.timeline.length - 1];
      publish(incidentLiveEvent(incident, last?.kind ?? action.kind, last?.at ?? action.now.toISOString()));
      return result;
    },
  };
}

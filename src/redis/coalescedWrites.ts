/**
 * Commands issued in one turn of the event loop leave in one socket write.
 *
 * ioredis writes each command to its socket as it is issued. A component's judgement issues several at once (its
 * reads of the group's statistics, its commit script, BullMQ's moves of the job), and each write is a system call
 * that, on a Redis of the same machine, also runs the server's side of the socket. Here the socket is corked at the
 * first write of a turn and uncorked once that turn's synchronous work and promise callbacks are done
 * (`process.nextTick`): the commands go out together, in the order issued, in one `writev`. Nothing waits for a timer
 * or for an earlier reply, unlike ioredis's auto-pipelining, which holds every command of a turn until the previous
 * batch is answered.
 *
 * Each new socket (ioredis opens one at every reconnect) is wrapped when it connects; for a Redis Cluster, each node's
 * connection as the cluster client opens it.
 */
import type { Socket } from 'node:net';
import { Cluster, type Redis } from 'ioredis';

const wrapped = new WeakSet<Socket>();

/** Corks `socket` at the first write of a turn and uncorks it when the turn is done. Wrapping twice does nothing. */
export function coalesceSocketWrites(socket: Socket): void {
  if (wrapped.has(socket)) return;
  wrapped.add(socket);
  let corked = false;
  const uncork = () => {
    corked = false;
    socket.uncork();
  };
  const write = socket.write;
  socket.write = function coalescedWrite(this: Socket, ...args: Parameters<Socket['write']>) {
    if (!corked) {
      corked = true;
      socket.cork();
      process.nextTick(uncork);
    }
    return write.apply(this, args);
  } as Socket['write'];
}

function coalesceNode(redis: Redis): void {
  const wrap = () => {
    const stream = (redis as unknown as { stream?: Socket }).stream;
    if (stream !== undefined) coalesceSocketWrites(stream);
  };
  redis.on('connect', wrap);
  // Already connected when handed over (a cluster's node is announced once its client exists).
  if (redis.status === 'connect' || redis.status === 'ready') wrap();
}

/** Coalesces the writes of a connection's sockets, now and after every reconnect. */
export function coalesceWrites(redis: Redis | Cluster): void {
  if (redis instanceof Cluster) {
    redis.on('+node', (node: Redis) => coalesceNode(node));
    for (const node of redis.nodes()) coalesceNode(node);
    return;
  }
  coalesceNode(redis);
}

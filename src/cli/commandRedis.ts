/**
 * A command that works straight against the live store: its configuration loaded (`--config`, else
 * WEARSHIFT_CONFIG), which Redis it uses said on stderr (the output itself stays the command's), one connection for
 * the work, closed afterwards whatever happens.
 */
import type { Config } from '../domain/config.ts';
import { closeQuietly, connectForCommand, redisTarget, type RedisConnection } from '../redis/connection.ts';
import { loadConfig } from '../runtime/loadConfig.ts';
import { redisChoice } from './output.ts';

export async function withRedis<T>(opts: { readonly config?: string }, work: (redis: RedisConnection, config: Config) => Promise<T>): Promise<T> {
  const config = loadConfig(opts.config ?? process.env.WEARSHIFT_CONFIG);
  process.stderr.write(`wearshift: ${redisChoice(config)}\n`);
  const redis = await connectForCommand(redisTarget(config));
  try {
    return await work(redis, config);
  } finally {
    await closeQuietly(redis);
  }
}

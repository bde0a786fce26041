/** A private Redis Cluster for tests (src/runtime/embeddedRedisCluster.ts). Tests never touch a Redis they did not start. */
export * from '../../src/runtime/embeddedRedisCluster.ts';

/**
 * Lua scripts: each runs atomically in Redis, so concurrent workers and redeliveries never see half a change.
 * Numbers travel as strings made by JavaScript (shortest exact form), never formatted by Lua.
 * Population keys are derived inside the scripts from a prefix argument; they share the hash tag of every
 * other key, so they live in the same cluster slot.
 */

/**
 * KEYS: revisions, winners, times, contributions, registry, mark, evaluated.
 * ARGV: sampleId, revision, sample JSON, time (ms), placement JSON {g, k, c: [[measurand, edge, v, v²]]},
 *       component key, registry JSON, population prefix, population member.
 * Returns {status, evaluationDue (0|1)}.
 */
export const STORE_SAMPLE = `
local revisionField = ARGV[1] .. '\\31' .. ARGV[2]
local stored = redis.call('HGET', KEYS[1], revisionField)
if stored then
  local due = tonumber(redis.call('GET', KEYS[6]) or '0') > tonumber(redis.call('GET', KEYS[7]) or '0')
  return { stored == ARGV[3] and 'duplicate' or 'conflict', due and 1 or 0 }
end
redis.call('HSET', KEYS[1], revisionField, ARGV[3])

local member = ARGV[9]
local function apply(placement, negate)
  local pop = ARGV[8] .. placement.g
  for _, c in ipairs(placement.c) do
    local field = c[1] .. '|' .. c[2]
    if negate then
      redis.call('HINCRBY', pop, field .. '|n', -1)
      redis.call('HINCRBYFLOAT', pop, field .. '|s', '-' .. c[3])
      redis.call('HINCRBYFLOAT', pop, field .. '|q', '-' .. c[4])
      redis.call('ZREM', pop .. '|' .. field, member)
    else
      redis.call('HINCRBY', pop, field .. '|n', 1)
      redis.call('HINCRBYFLOAT', pop, field .. '|s', c[3])
      redis.call('HINCRBYFLOAT', pop, field .. '|q', c[4])
      if placement.k == 1 then redis.call('ZADD', pop .. '|' .. field, c[3], member) end
    end
  end
end

local winner = redis.call('HGET', KEYS[2], ARGV[1])
local status
if winner and tonumber(ARGV[2]) < tonumber(winner) then
  status = 'superseded'
else
  if winner then
    status = 'replacement'
    local old = redis.call('HGET', KEYS[4], ARGV[1])
    if old then apply(cjson.decode(old), true) end
  else
    status = 'new'
  end
  apply(cjson.decode(ARGV[5]), false)
  redis.call('HSET', KEYS[4], ARGV[1], ARGV[5])
  redis.call('HSET', KEYS[2], ARGV[1], ARGV[2])
  redis.call('ZADD', KEYS[3], ARGV[4], ARGV[1])
  redis.call('HSET', KEYS[5], ARGV[6], ARGV[7])
end
redis.call('INCR', KEYS[6])
return { status, 1 }
`;

/** KEYS: lock. ARGV: token, ttl ms. Returns 1 when renewed. */
export const RENEW_LOCK = `
if redis.call('GET', KEYS[1]) == ARGV[1] then return redis.call('PEXPIRE', KEYS[1], ARGV[2]) end
return 0
`;

/** KEYS: lock. ARGV: token. Deletes only our own lock. */
export const RELEASE_LOCK = `
if redis.call('GET', KEYS[1]) == ARGV[1] then return redis.call('DEL', KEYS[1]) end
return 0
`;

/**
 * KEYS: lock, evaluated, fed, steps, step times, baseline group.
 * ARGV: token, mark, fed JSON or '', steps JSON [[sampleId, time, step JSON or '']], findings log limit,
 *       baselines prefix, group, component key, baselines JSON or ''.
 * Returns 0 (lock lost, nothing written) or 1.
 */
export const COMMIT_EVALUATION = `
if redis.call('GET', KEYS[1]) ~= ARGV[1] then return 0 end
if tonumber(ARGV[2]) > tonumber(redis.call('GET', KEYS[2]) or '0') then redis.call('SET', KEYS[2], ARGV[2]) end
if ARGV[3] ~= '' then redis.call('SET', KEYS[3], ARGV[3]) end
for _, s in ipairs(cjson.decode(ARGV[4])) do
  if s[3] == '' then
    redis.call('HDEL', KEYS[4], s[1])
    redis.call('ZREM', KEYS[5], s[1])
  else
    redis.call('HSET', KEYS[4], s[1], s[3])
    redis.call('ZADD', KEYS[5], s[2], s[1])
  end
end
local excess = redis.call('ZCARD', KEYS[5]) - tonumber(ARGV[5])
if excess > 0 then
  for _, id in ipairs(redis.call('ZRANGE', KEYS[5], 0, excess - 1)) do redis.call('HDEL', KEYS[4], id) end
  redis.call('ZREMRANGEBYRANK', KEYS[5], 0, excess - 1)
end
local previous = redis.call('GET', KEYS[6])
if previous and previous ~= ARGV[7] then redis.call('HDEL', ARGV[6] .. previous, ARGV[8]) end
if ARGV[9] == '' then
  redis.call('HDEL', ARGV[6] .. ARGV[7], ARGV[8])
else
  redis.call('HSET', ARGV[6] .. ARGV[7], ARGV[8], ARGV[9])
end
redis.call('SET', KEYS[6], ARGV[7])
return 1
`;

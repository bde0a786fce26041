/**
 * Lua scripts: each runs atomically in Redis, so concurrent workers and redeliveries never see half a change.
 * Every key a script touches carries its partition's hash tag (keys.ts), so each script stays within one Redis
 * Cluster slot. Numbers travel as strings made by JavaScript (shortest exact form) or by Lua's %.17g, never rounded.
 *
 * A position in a history is `time|unitHours|sampleId` (unitHours empty when unknown) and compares as the analysis
 * orders samples: by time, then unit hours (missing last), then sampleId.
 */

const POSITION = `
local function pos_parse(p)
  local t, u, id = string.match(p, '^([^|]*)|([^|]*)|(.*)$')
  return tonumber(t), (u ~= '' and tonumber(u) or nil), id
end
local function pos_cmp(a, b)
  local ta, ua, ia = pos_parse(a)
  local tb, ub, ib = pos_parse(b)
  if ta ~= tb then return ta < tb and -1 or 1 end
  if ua ~= nil and ub ~= nil and ua ~= ub then return ua < ub and -1 or 1 end
  if (ua == nil) ~= (ub == nil) then return ua == nil and 1 or -1 end
  if ia == ib then return 0 end
  return ia < ib and -1 or 1
end
-- dirty: the earliest position changed since the last settled commit; later: the same since the last input read
-- under the lock, which a commit that does not cover every change leaves as the component's dirty position.
local function mark_dirty(ev, pos)
  local cur = redis.call('HGET', ev, 'dirty')
  if not cur or pos_cmp(pos, cur) < 0 then redis.call('HSET', ev, 'dirty', pos) end
  local later = redis.call('HGET', ev, 'later')
  if not later or pos_cmp(pos, later) < 0 then redis.call('HSET', ev, 'later', pos) end
end
`;

/**
 * KEYS: revisions, winners, order, evaluation, registry.
 * ARGV: sampleId, revision, sample core (encodeSampleCore), receivedAt (base 36), time, unitHours or '', component
 * key, registry JSON, group or '', lab or '', the sample in the earlier stored form (encodeSample).
 * The revisions hash keeps the component's common group and lab under the field `*` (set by the first sample stored
 * in this layout, never changed); a revision is stored as `receivedAt|core,group,lab` with `*` for the common ones.
 * A revision stored in the earlier layout (`receivedAt|[JSON array]`) is compared in the earlier form.
 * Returns {status, evaluationDue (0|1)}.
 */
export const STORE_SAMPLE = `${POSITION}
local field = ARGV[1] .. '\\31' .. ARGV[2]
local common = redis.call('HGET', KEYS[1], '*')
local stored = redis.call('HGET', KEYS[1], field)
local function due()
  return tonumber(redis.call('HGET', KEYS[4], 'mark') or '0') > tonumber(redis.call('HGET', KEYS[4], 'done') or '0')
end
local function part(v, c)
  if v == '' then return '' elseif v == c then return '*' else return v end
end
local function compose(c)
  local cg, cl = string.match(c, '^([^,]*),(.*)$')
  return ARGV[3] .. ',' .. part(ARGV[9], cg) .. ',' .. part(ARGV[10], cl)
end
if stored then
  local sep = string.find(stored, '|', 1, true)
  local body = string.sub(stored, sep + 1)
  local same
  if string.sub(body, 1, 1) == '[' then same = body == ARGV[11] else same = common and body == compose(common) end
  return { same and 'duplicate' or 'conflict', due() and 1 or 0 }
end
if not common then
  common = ARGV[9] .. ',' .. ARGV[10]
  redis.call('HSET', KEYS[1], '*', common)
end
redis.call('HSET', KEYS[1], field, ARGV[4] .. '|' .. compose(common))
local pos = ARGV[5] .. '|' .. ARGV[6] .. '|' .. ARGV[1]
local winner = redis.call('HGET', KEYS[2], ARGV[1])
local status = 'new'
local share = ''
if winner then
  local wrev, wtime, wuh, wshare = string.match(winner, '^([^|]*)|([^|]*)|([^|]*)|(.*)$')
  if tonumber(ARGV[2]) < tonumber(wrev) then
    status = 'superseded'
  else
    status = 'replacement'
    share = wshare
    local old = wtime .. '|' .. wuh .. '|' .. ARGV[1]
    if pos_cmp(old, pos) < 0 then mark_dirty(KEYS[4], old) end
  end
end
if status ~= 'superseded' then
  mark_dirty(KEYS[4], pos)
  redis.call('HSET', KEYS[2], ARGV[1], ARGV[2] .. '|' .. ARGV[5] .. '|' .. ARGV[6] .. '|' .. share)
  redis.call('ZADD', KEYS[3], ARGV[5], ARGV[1])
  redis.call('HSET', KEYS[5], ARGV[7], ARGV[8])
end
redis.call('HINCRBY', KEYS[4], 'mark', 1)
return { status, due() and 1 or 0 }
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
 * Takes a component's evaluation lock and reads what an evaluation starts from, in one step.
 * KEYS: lock, registry, order, evaluation, incident index. ARGV: token, lock lifetime (ms), component key.
 * Returns {0} when another holds the lock, else {1, registry entry, samples, last sample, its time, mark, dirty,
 * latest checkpoint, incidents, incidents version, marks, latest incident opening time} ('' for what is missing).
 */
export const ACQUIRE_WITH_INPUT = `
if not redis.call('SET', KEYS[1], ARGV[1], 'PX', ARGV[2], 'NX') then return { 0 } end
local head = redis.call('HGET', KEYS[2], ARGV[3]) or ''
local count = redis.call('ZCARD', KEYS[3])
local last = redis.call('ZRANGE', KEYS[3], -1, -1, 'WITHSCORES')
local f = redis.call('HMGET', KEYS[4], 'mark', 'dirty', 'latest', 'incidents', 'version', 'marks')
-- The opening time of the component's latest incident on record (KEYS[5], by opening time), or ''.
local opened = redis.call('ZRANGE', KEYS[5], -1, -1, 'WITHSCORES')
-- Changes from here on are what a commit of this evaluation may leave due (mark_dirty).
redis.call('HDEL', KEYS[4], 'later')
local out = { 1, head, count, last[1] or '', last[2] or '' }
for i = 1, 6 do out[5 + i] = f[i] or '' end
out[12] = opened[2] or ''
return out
`;

/**
 * The winning revisions of a component after a position (all when ARGV[1] is ''), in the order of the sorted set
 * (by time; JavaScript orders samples of one time). KEYS: order, winners, revisions. ARGV: position or ''.
 * Returns {common group and lab or '', then per sample: id, winner entry, stored revision or ''}.
 */
export const SAMPLES_AFTER = `${POSITION}
-- HMGET in slices: unpack() takes at most a few thousand values.
local function hmget(key, names)
  local got = {}
  for from = 1, #names, 1000 do
    local slice = redis.call('HMGET', key, unpack(names, from, math.min(from + 999, #names)))
    for i = 1, #slice do got[from + i - 1] = slice[i] end
  end
  return got
end
local ids
if ARGV[1] == '' then
  ids = redis.call('ZRANGE', KEYS[1], 0, -1)
else
  ids = redis.call('ZRANGEBYSCORE', KEYS[1], string.match(ARGV[1], '^([^|]*)|'), '+inf')
end
local out = { redis.call('HGET', KEYS[3], '*') or '' }
if #ids == 0 then return out end
local winners = hmget(KEYS[2], ids)
local picked, fields = {}, {}
for i, id in ipairs(ids) do
  local w = winners[i]
  if w then
    local rev, t, u = string.match(w, '^([^|]*)|([^|]*)|([^|]*)')
    if ARGV[1] == '' or pos_cmp(t .. '|' .. u .. '|' .. id, ARGV[1]) > 0 then
      table.insert(picked, { id, w })
      table.insert(fields, id .. '\\31' .. rev)
    end
  end
end
if #fields == 0 then return out end
local values = hmget(KEYS[3], fields)
for i, x in ipairs(picked) do
  table.insert(out, x[1])
  table.insert(out, x[2])
  table.insert(out, values[i] or '')
end
return out
`;

/**
 * A component's own shares of its group's month buckets for the months from ARGV[1] ('' for all) up to, not
 * including, ARGV[2] ('' for no end): its winners' population shares (`month;field=value,...`, what follows the third
 * bar of a winner entry) and its baseline entries (`bl|measurand` → `month;values`). Filtered here by the month each
 * share names, so that a reply carries the few months an evaluation subtracts rather than the whole history.
 * KEYS: winners, evaluation. Returns {number of population shares, the shares, then baseline field and entry pairs}.
 */
export const OWN_SHARES = `
local from, to = ARGV[1], ARGV[2]
local function wanted(month)
  return month >= from and (to == '' or month < to)
end
local out = { 0 }
for _, winner in ipairs(redis.call('HVALS', KEYS[1])) do
  local share = string.match(winner, '^[^|]*|[^|]*|[^|]*|(.*)$')
  if share and share ~= '' then
    local month = string.match(share, '^([^;]*);')
    if month and wanted(month) then out[#out + 1] = share end
  end
end
out[1] = #out - 1
local fields = {}
for _, f in ipairs(redis.call('HKEYS', KEYS[2])) do
  if string.sub(f, 1, 3) == 'bl|' then fields[#fields + 1] = f end
end
if #fields > 0 then
  local entries = redis.call('HMGET', KEYS[2], unpack(fields))
  for i = 1, #fields do
    local entry = entries[i]
    if entry then
      local month = string.match(entry, '^([^;]*);')
      if month and wanted(month) then
        out[#out + 1] = fields[i]
        out[#out + 1] = entry
      end
    end
  end
end
return out
`;

/** KEYS: evaluation. ARGV: position. Marks the component for evaluation from the position. */
export const MARK_DIRTY = `${POSITION}
mark_dirty(KEYS[1], ARGV[1])
redis.call('HINCRBY', KEYS[1], 'mark', 1)
return 1
`;

/**
 * KEYS: evaluation, winners. ARGV: sampleId, mark ('' clears it), who gave it (the JSON text of a WordGiven, or '').
 * Returns 0 when the component has no such sample.
 */
export const MARK_SAMPLE = `${POSITION}
local winner = redis.call('HGET', KEYS[2], ARGV[1])
if not winner then return 0 end
local _, wtime, wuh = string.match(winner, '^([^|]*)|([^|]*)|([^|]*)|')
local marks = cjson.decode(redis.call('HGET', KEYS[1], 'marks') or '{}')
if ARGV[2] == '' then marks[ARGV[1]] = nil else marks[ARGV[1]] = ARGV[2] end
redis.call('HSET', KEYS[1], 'marks', next(marks) == nil and '{}' or cjson.encode(marks))
-- Who gave the word, when and after which sample (a JSON text kept as it is), or nothing: it goes with the mark.
local words = cjson.decode(redis.call('HGET', KEYS[1], 'words') or '{}')
if ARGV[2] == '' or ARGV[3] == '' then words[ARGV[1]] = nil else words[ARGV[1]] = ARGV[3] end
redis.call('HSET', KEYS[1], 'words', next(words) == nil and '{}' or cjson.encode(words))
mark_dirty(KEYS[1], wtime .. '|' .. wuh .. '|' .. ARGV[1])
redis.call('HINCRBY', KEYS[1], 'mark', 1)
return 1
`;

/**
 * The incident part of a commit: records, indexes and the outbox. And `stored`: a stored value the payload names by
 * its argument number (the compact values travel as arguments of their own, bytes as they are; compactText.ts).
 */
const INCIDENT_RECORDS = `
local function stored(v)
  if type(v) == 'number' then return ARGV[v] end
  return v
end
local function write_incidents(p, recordsKey, openKey, closedKey, outboxKey, indexKey)
  for _, r in ipairs(p.records) do
    redis.call('HSET', recordsKey, r[1], stored(r[2]))
    if r[3] == 'open' then
      redis.call('ZADD', openKey, r[4], r[1])
      redis.call('ZREM', closedKey, r[1])
    else
      redis.call('ZADD', closedKey, r[4], r[1])
      redis.call('ZREM', openKey, r[1])
    end
    redis.call('ZADD', indexKey, r[5], r[1])
  end
  for _, e in ipairs(p.outbox) do redis.call('RPUSH', outboxKey, e) end
end
`;

/**
 * An operator's action or an escalation check on a component's incidents: compare-and-set on the version.
 * KEYS: evaluation, records, open, closed, outbox, component incident index.
 * ARGV: expected version, payload JSON {state, records: [[id, record, open|closed, score, openedTime]], outbox: [json]},
 * then the stored values (the state and each record, compactText.ts), one argument each (ARGV[3] on), which the
 * payload names by number.
 * Returns 1, or 0 when the version moved on (someone else changed the incidents: read again and retry).
 */
export const UPDATE_INCIDENTS = `${INCIDENT_RECORDS}
if (redis.call('HGET', KEYS[1], 'version') or '0') ~= ARGV[1] then return 0 end
local p = cjson.decode(ARGV[2])
redis.call('HSET', KEYS[1], 'incidents', stored(p.state), 'version', tostring(tonumber(ARGV[1]) + 1))
write_incidents(p, KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6])
return 1
`;

/**
 * Commits an evaluation: only while the lock holds and the incidents are still at the version read.
 * KEYS: lock, evaluation, winners, steps, component incident index, own shares of an earlier layout (deleted), registry,
 * records, open, closed, outbox.
 * ARGV: token, mark, payload JSON:
 *   latest, sparse [[field, checkpoint]], rewound ('' none, 'start', or a position), due ('' or the position from which
 *   read samples were not folded), steps [[field, record or '']], limit,
 *   shares [[sampleId, share or '']] (share: month;field=value,...), baselines {measurand: entry or ''}
 *   (entry: month;v1,...,v13), group, groupPrefix, member, horizon, registry, keepValues (0|1), componentKey,
 *   version, state (the component's incident state), records [[id, record, open|closed, score, openedTime]], outbox;
 * then the stored values (latest, each checkpoint, step record and incident record, the state: compact, compactText.ts),
 * one argument each (ARGV[4] on), which the payload names by number.
 * With release 1 in the payload, the lock goes too when nothing changed since the evaluation's input (settled).
 * With partial 1 (SharesCommit), only the group shares, baselines, horizon and registry entry are written (the payload
 * then holds only those, with group, groupPrefix, member, keepValues and componentKey): no version check, no mark.
 * Returns {1, earliest changed month or '', settled (0|1)}, {0} when the lock was lost, {-1} when the incidents
 * changed.
 */
export const COMMIT_EVALUATION = `${POSITION}${INCIDENT_RECORDS}
if redis.call('GET', KEYS[1]) ~= ARGV[1] then return { 0 } end
local ev = KEYS[2]
local p = cjson.decode(ARGV[3])
-- A partial commit (of an evaluation still under way) writes the group shares, the horizon and the registry entry only.
local partial = p.partial == 1
if not partial and (redis.call('HGET', ev, 'version') or '0') ~= p.version then return { -1 } end
local fields = redis.call('HKEYS', ev)
local settled = false

if not partial then
-- The component's change mark and the checkpoints.
-- A commit that leaves read samples due does not count as covering the changes: a result stored again is still due.
if (p.due or '') == '' and tonumber(ARGV[2]) > tonumber(redis.call('HGET', ev, 'done') or '0') then redis.call('HSET', ev, 'done', ARGV[2]) end
-- Not settled: what changed after the input was read, and what the evaluation read but did not fold (due), is still
-- due from its earliest position on (what the evaluation folded before it stays committed).
local due = p.due or ''
settled = redis.call('HGET', ev, 'mark') == ARGV[2] and due == ''
local later = redis.call('HGET', ev, 'later')
if due ~= '' and (not later or pos_cmp(due, later) < 0) then later = due end
if settled then redis.call('HDEL', ev, 'dirty') elseif later then redis.call('HSET', ev, 'dirty', later) end
redis.call('HDEL', ev, 'later')
redis.call('HSET', ev, 'latest', stored(p.latest))
if p.rewound ~= '' then
  for _, f in ipairs(fields) do
    if string.sub(f, 1, 3) == 'cp|' then
      local cpos = string.match(f, '^cp|[^|]*|(.*)$')
      if p.rewound == 'start' or pos_cmp(cpos, p.rewound) > 0 then redis.call('HDEL', ev, f) end
    end
  end
end
for _, cp in ipairs(p.sparse) do redis.call('HSET', ev, cp[1], stored(cp[2])) end
-- Keep the four latest sparse checkpoints and up to four older ones at every eighth step of their spacing.
local cps = {}
for _, f in ipairs(redis.call('HKEYS', ev)) do
  if string.sub(f, 1, 3) == 'cp|' then table.insert(cps, { tonumber(string.match(f, '^cp|([^|]*)|')), f }) end
end
table.sort(cps, function(a, b) return a[1] > b[1] end)
if #cps > 4 then
  local spacing = cps[1][1] - cps[2][1]
  local older = 0
  for i = 5, #cps do
    if spacing > 0 and cps[i][1] % (spacing * 8) == 0 and older < 4 then older = older + 1 else redis.call('HDEL', ev, cps[i][2]) end
  end
end

-- The findings log: steps with findings, the latest ones.
for _, s in ipairs(p.steps) do
  if s[2] == '' then redis.call('HDEL', KEYS[4], s[1]) else redis.call('HSET', KEYS[4], s[1], stored(s[2])) end
end
local excess = redis.call('HLEN', KEYS[4]) - tonumber(p.limit)
if excess > 0 then
  local names = redis.call('HKEYS', KEYS[4])
  table.sort(names)
  for i = 1, excess do redis.call('HDEL', KEYS[4], names[i]) end
end
end

-- The group's month buckets in this partition. The component's own shares of them are its winners' population
-- shares and its baseline entries (bl|…), read from there; the hash of them that an earlier layout kept goes.
redis.call('DEL', KEYS[6])
local changed = nil
local function apply(prefix, month, values, sign)
  local bucket = prefix .. ':m:' .. month
  for f, v in pairs(values) do
    redis.call('HINCRBYFLOAT', bucket, f, sign * v)
  end
  redis.call('HINCRBY', prefix .. ':v', month, 1)
  if changed == nil or month < changed then changed = month end
end
local function population(share)
  local month, list = string.match(share, '^([^;]*);(.*)$')
  local values = {}
  local raw = {}
  for f, v in string.gmatch(list, '([^,=]+)=([^,]+)') do
    local x = tonumber(v)
    values['p|' .. f .. '|n'] = (values['p|' .. f .. '|n'] or 0) + 1
    values['p|' .. f .. '|s'] = (values['p|' .. f .. '|s'] or 0) + x
    values['p|' .. f .. '|q'] = (values['p|' .. f .. '|q'] or 0) + x * x
    raw[f] = x
  end
  return month, values, raw
end
local function keep_values(prefix, month, raw, member, add)
  if p.keepValues ~= 1 then return end
  for f, x in pairs(raw) do
    local key = prefix .. ':vals:' .. month .. ':' .. f
    if add then redis.call('ZADD', key, x, member) else redis.call('ZREM', key, member) end
  end
end
local baselineNames = { 'components', 'intervals', 'sumHours', 'sumHoursSq', 'sumIncrement', 'sumIncrementSq', 'sumIncrementHours', 'sumLabVariance', 'sumRate', 'sumRateSq', 'positive', 'sumLog', 'sumLogSq' }
local function baseline(m, entry)
  local month, list = string.match(entry, '^([^;]*);(.*)$')
  local values = {}
  local i = 1
  for v in string.gmatch(list, '([^,]+)') do
    values['b|' .. m .. '|' .. baselineNames[i]] = tonumber(v)
    i = i + 1
  end
  return month, values
end
local oldPrefix = redis.call('HGET', ev, 'gp')
if oldPrefix and oldPrefix ~= p.groupPrefix then
  -- The component changed group: its shares move with it.
  local winners = redis.call('HGETALL', KEYS[3])
  for i = 1, #winners, 2 do
    local share = string.match(winners[i + 1], '^[^|]*|[^|]*|[^|]*|(.*)$')
    if share ~= '' then
      local month, values, raw = population(share)
      apply(oldPrefix, month, values, -1)
      keep_values(oldPrefix, month, raw, p.componentKey .. '\\31' .. winners[i], false)
      apply(p.groupPrefix, month, values, 1)
      keep_values(p.groupPrefix, month, raw, p.componentKey .. '\\31' .. winners[i], true)
    end
  end
  for _, f in ipairs(fields) do
    if string.sub(f, 1, 3) == 'bl|' then
      local month, values = baseline(string.sub(f, 4), redis.call('HGET', ev, f))
      apply(oldPrefix, month, values, -1)
      apply(p.groupPrefix, month, values, 1)
    end
  end
  redis.call('ZREM', oldPrefix .. ':h', p.member)
end
redis.call('HSET', ev, 'gp', p.groupPrefix)
for _, s in ipairs(p.shares) do
  local winner = redis.call('HGET', KEYS[3], s[1])
  if winner then
    local head, old = string.match(winner, '^([^|]*|[^|]*|[^|]*)|(.*)$')
    if old ~= s[2] then
      local member = p.componentKey .. '\\31' .. s[1]
      if old ~= '' then
        local month, values, raw = population(old)
        apply(p.groupPrefix, month, values, -1)
        keep_values(p.groupPrefix, month, raw, member, false)
      end
      if s[2] ~= '' then
        local month, values, raw = population(s[2])
        apply(p.groupPrefix, month, values, 1)
        keep_values(p.groupPrefix, month, raw, member, true)
      end
      redis.call('HSET', KEYS[3], s[1], head .. '|' .. s[2])
    end
  end
end
for m, entry in pairs(p.baselines) do
  local old = redis.call('HGET', ev, 'bl|' .. m) or ''
  if old ~= entry then
    if old ~= '' then
      local month, values = baseline(m, old)
      apply(p.groupPrefix, month, values, -1)
    end
    if entry ~= '' then
      local month, values = baseline(m, entry)
      apply(p.groupPrefix, month, values, 1)
      redis.call('HSET', ev, 'bl|' .. m, entry)
    else
      redis.call('HDEL', ev, 'bl|' .. m)
    end
  end
end
redis.call('ZADD', p.groupPrefix .. ':h', 'GT', p.horizon, p.member)
redis.call('HSET', KEYS[7], p.componentKey, p.registry)
if partial then return { 1, changed or '', 0 } end

-- The incidents, their records and their messages: each record and the state are arguments of their own.
redis.call('HSET', ev, 'incidents', stored(p.state), 'version', tostring(tonumber(p.version) + 1))
write_incidents(p, KEYS[8], KEYS[9], KEYS[10], KEYS[11], KEYS[5])
if settled and p.release == 1 then redis.call('DEL', KEYS[1]) end
return { 1, changed or '', settled and 1 or 0 }
`;

/** Claims up to ARGV[2] effects: first those whose claim went stale (a drainer died), then new ones. KEYS: outbox, claimed. */
export const CLAIM_OUTBOX = `
local n = tonumber(ARGV[2])
local out = redis.call('ZRANGEBYSCORE', KEYS[2], '-inf', ARGV[3], 'LIMIT', 0, n)
for _, m in ipairs(out) do redis.call('ZADD', KEYS[2], ARGV[1], m) end
local rest = n - #out
if rest > 0 then
  local items = redis.call('LPOP', KEYS[1], rest)
  if items then
    for _, m in ipairs(items) do
      redis.call('ZADD', KEYS[2], ARGV[1], m)
      table.insert(out, m)
    end
  end
end
return out
`;

/**
 * Reads a sorted set after a position: up to ARGV[3] entries (member, score, …) strictly after (score ARGV[1], member
 * ARGV[2]) in the set's order (score, then member byte by byte, as Redis orders ties), or in its exact reverse with
 * ARGV[4] = '1'. The member need not be in the set any more, nor at that score: the entries after the position are
 * the same either way. Read in one step, so that a change meanwhile cannot shift the start.
 * KEYS: the sorted set.
 */
export const RANGE_AFTER = `
local key, score, member, count = KEYS[1], tonumber(ARGV[1]), ARGV[2], tonumber(ARGV[3])
local reverse = ARGV[4] == '1'
local start
local own = redis.call('ZSCORE', key, member)
if own and tonumber(own) == score then
  start = redis.call(reverse and 'ZREVRANK' or 'ZRANK', key, member) + 1
else
  -- Byte order, as the sorted set compares members (Lua's own comparison follows the server's locale).
  local function less(a, b)
    for i = 1, math.min(#a, #b) do
      local x, y = string.byte(a, i), string.byte(b, i)
      if x ~= y then return x < y end
    end
    return #a < #b
  end
  if reverse then start = redis.call('ZCOUNT', key, '(' .. ARGV[1], '+inf') else start = redis.call('ZCOUNT', key, '-inf', '(' .. ARGV[1]) end
  for _, m in ipairs(redis.call('ZRANGEBYSCORE', key, ARGV[1], ARGV[1])) do
    if (reverse and less(member, m)) or (not reverse and less(m, member)) then start = start + 1 end
  end
end
return redis.call(reverse and 'ZREVRANGE' or 'ZRANGE', key, start, start + count - 1, 'WITHSCORES')
`;

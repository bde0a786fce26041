/**
 * The YAML configuration: groups, limits, new-oil references and detection parameters.
 * Every section is optional; an empty file gives the built-in defaults documented in the README.
 */
import { DEFAULT_HOURS_PER_YEAR, DEFAULT_SAMPLE_INTERVAL_HOURS } from './budgetDefaults.ts';
import { z } from 'zod';
import { MEASURAND_NAMES, type Measurand } from './measurands.ts';
import { parseReading } from './reading.ts';
import { AlarmFiguresSchema } from './alarmFiguresConfig.ts';
import { ChannelsSchema, DEFAULT_FLOOD_CONTROL, EscalationSchema, escalationChannelIssues, IncidentsConfigSchema } from './escalationConfig.ts';
import { OpcuaConfigSchema } from './opcuaConfig.ts';
import { DEFAULT_FORECAST, ForecastSchema } from './forecastConfig.ts';
import { budgetIssue, DESIGNABLE_EWMA_LAMBDA, DESIGNABLE_RUN_LENGTH } from './configBudget.ts';
import { resolveSettings } from './settings.ts';
import { addressRangeProblem } from './addressRange.ts';

const measurandName = z.enum(MEASURAND_NAMES as [Measurand, ...Measurand[]], { error: (i) => `unknown measurand "${String(i.input)}"` });
const positive = z.number().finite().positive();
const nonNegative = z.number().finite().min(0);

/** Whether the runtime knows the IANA zone name. */
function isTimeZone(name: string): boolean {
  try {
    new Intl.DateTimeFormat('en-US', { timeZone: name });
    return true;
  } catch {
    return false;
  }
}

const levels = z
  .object({ caution: nonNegative.optional(), alarm: nonNegative.optional() })
  .strict()
  .refine((l) => l.caution === undefined || l.alarm === undefined || l.caution <= l.alarm, { message: 'caution must not exceed alarm' });
export type Levels = z.infer<typeof levels>;

const levelsByMeasurand = z.partialRecord(measurandName, levels);

const iso4406Code = z.string().refine((s) => parseReading(s, 'iso4406').ok, { message: 'expected an ISO 4406 code such as "17/15/12"' });

export const BudgetSchema = z
  .object({
    alarms: positive.default(1).describe('False alarms allowed per component over `years`.'),
    years: positive.default(5),
    sampleIntervalHours: positive.default(DEFAULT_SAMPLE_INTERVAL_HOURS).describe('Typical operating hours between samples.'),
    hoursPerYear: positive.max(8784).default(DEFAULT_HOURS_PER_YEAR).describe('Operating hours per calendar year.'),
  })
  .strict();
export type Budget = z.infer<typeof BudgetSchema>;

export const DetectionSchema = z
  .object({
    measurands: z.array(measurandName).default(['Fe', 'Cu', 'Al', 'Cr', 'Pb', 'Sn', 'Ni']).describe('Wear metals whose wear rate is watched by EWMA and CUSUM.'),
    budget: BudgetSchema.default(BudgetSchema.parse({})).describe(
      `The false-alarm budget from which h and L are derived when not given. Each side of a chart must get an in-control run length of ${DESIGNABLE_RUN_LENGTH.min} to ${DESIGNABLE_RUN_LENGTH.max} samples from it (years × hoursPerYear / sampleIntervalHours / alarms × charts / the side's share of the budget); the configuration is refused otherwise.`,
    ),
    ewma: z
      .object({
        enabled: z.boolean().default(true),
        lambda: z
          .number()
          .min(DESIGNABLE_EWMA_LAMBDA.min, `must be at least ${DESIGNABLE_EWMA_LAMBDA.min}, the smallest smoothing constant of the published EWMA design tables (a smaller one remembers decades of samples, and designing its limits takes minutes)`)
          .max(DESIGNABLE_EWMA_LAMBDA.max)
          .default(0.2)
          .describe(`Smoothing constant, ${DESIGNABLE_EWMA_LAMBDA.min} to ${DESIGNABLE_EWMA_LAMBDA.max}: the weight of the newest sample.`),
        L: positive.optional().describe('Limit width in sigma; derived from the budget when absent.'),
      })
      .strict()
      .default({ enabled: true, lambda: 0.2 }),
    cusum: z
      .object({
        enabled: z.boolean().default(true),
        k: nonNegative.default(0.5).describe('Reference value in sigma: half the shift to detect fastest.'),
        h: positive.optional().describe('Decision interval in sigma; derived from the budget when absent.'),
        headstart: nonNegative.lt(1).default(0).describe('Fast-initial-response headstart as a fraction of h (0.5 is the usual choice).'),
      })
      .strict()
      .default({ enabled: true, k: 0.5, headstart: 0 }),
    sided: z.enum(['two', 'up']).default('two').describe('two: a fall in wear rate is reported too, as a possible sampling fault.'),
    fallShare: z
      .number()
      .gt(0)
      .lt(1)
      .default(0.1)
      .describe(
        'With sided: two, the part of the change detectors\' false-alarm budget their fall side gets (a fall opens a sampling incident); the rise side, which opens wear incidents, gets the rest. Applies where h and L are derived from the budget.',
      ),
    runningInHours: nonNegative.default(250).describe('Hours after a new or overhauled component kept out of the baseline.'),
    baselineIntervals: z.number().int().min(2).default(12).describe('Stable intervals that form the own baseline (in-control rate and spread); until then the group baseline is used.'),
    labNoise: z
      .object({
        absolute: nonNegative.default(1).describe('Lab repeatability floor in ppm (one standard deviation).'),
        relative: nonNegative.max(1).default(0.05).describe('Lab repeatability as a fraction of the reading (one standard deviation).'),
      })
      .strict()
      .default({ absolute: 1, relative: 0.05 }),
  })
  .strict();
export type Detection = z.infer<typeof DetectionSchema>;

export const PopulationSchema = z
  .object({
    measurands: z.array(measurandName).optional().describe('Measurands given population limits; default: every wear metal and Si, Na, K.'),
    minResults: z.number().int().min(2).default(30).describe('Results a band needs before its limits are trusted (common practice: about 30).'),
    bandHours: z.array(nonNegative).min(1).default([0, 250, 500, 1000]).describe('Lower edges of the oil-hours bands.'),
    method: z.enum(['sigma', 'percentile']).default('sigma'),
    sigma: z.object({ caution: positive.default(1), alarm: positive.default(2) }).strict().default({ caution: 1, alarm: 2 }),
    percentile: z
      .object({ caution: z.number().gt(0).lt(100).default(90), alarm: z.number().gt(0).lt(100).default(97.5) })
      .strict()
      .default({ caution: 90, alarm: 97.5 }),
    opensIncidents: z
      .boolean()
      .default(false)
      .describe(
        'Whether a single result above its band\'s population level opens an incident. Default false: such a result is shown as an advisory (a per-sample limit at mean + 1σ flags about 16 % of healthy results by construction and cannot hold a false-alarm budget).',
      ),
    peers: z
      .object({
        enabled: z.boolean().default(true).describe('Compare each component\'s own in-control wear rate with the rates of the other units of its group.'),
        minComponents: z.number().int().min(3).default(5).describe('Other units with a complete own baseline needed before the comparison is made.'),
        minRatio: z
          .number()
          .min(1)
          .default(1.5)
          .describe('A rate is compared only when it is at least this many times the peers\' typical rate: a unit wearing a little faster than its peers is no incident.'),
        budgetShare: z
          .number()
          .gt(0)
          .lt(1)
          .default(0.2)
          .describe('Share of the false-alarm budget (detection.budget) given to this comparison; the change detectors get the rest.'),
      })
      .strict()
      .default({ enabled: true, minComponents: 5, minRatio: 1.5, budgetShare: 0.2 })
      .describe('Rate compared with like-for-like units: a component that wears faster than its peers from the start (its own baseline would hide it).'),
  })
  .strict();
export type Population = z.infer<typeof PopulationSchema>;

export const ConditionSchema = z
  .object({
    tbnFallFraction: z.number().gt(0).lt(1).default(0.5).describe('Alarm when TBN falls to this fraction of new (common practice: half).'),
    tanRise: z.object({ caution: positive.default(1), alarm: positive.default(2) }).strict().default({ caution: 1, alarm: 2 }).describe('TAN rise over new oil, mg KOH/g.'),
    viscosityChangePercent: z.object({ caution: positive.default(10), alarm: positive.default(20) }).strict().default({ caution: 10, alarm: 20 }),
    water: levels.default({ caution: 500, alarm: 1000 }).describe('Water in ppm.'),
    fuel: levels.default({ caution: 2.5, alarm: 5 }).describe('Fuel dilution in %.'),
    soot: levels.default({ caution: 1.5, alarm: 3 }).describe('Soot in %.'),
    oxidation: levels.default({ caution: 20, alarm: 30 }).describe('Oxidation in A/cm above new oil.'),
    nitration: levels.default({ caution: 20, alarm: 30 }).describe('Nitration in A/cm above new oil.'),
    glycolSeverity: z.enum(['caution', 'alarm']).default('alarm').describe('Any glycol found is coolant in the oil.'),
  })
  .strict();
export type Condition = z.infer<typeof ConditionSchema>;

/**
 * A group's override of a top-level section: the same fields, all optional and without defaults, so that a
 * group naming one field keeps the top-level value of every other (defaults belong to the top level only).
 */
function overrideOf(schema: z.ZodType): z.ZodType {
  if (schema instanceof z.ZodDefault) return overrideOf(schema.removeDefault() as z.ZodType);
  if (schema instanceof z.ZodOptional) return overrideOf(schema.unwrap() as z.ZodType);
  if (!(schema instanceof z.ZodObject) || !hasDefaults(schema)) return schema;
  const shape = Object.fromEntries(Object.entries(schema.shape).map(([k, v]) => [k, overrideOf(v as z.ZodType).optional()]));
  const rebuilt = z.object(shape).strict();
  return schema.description === undefined ? rebuilt : rebuilt.describe(schema.description);
}

function hasDefaults(schema: z.ZodType): boolean {
  if (schema instanceof z.ZodDefault) return true;
  if (schema instanceof z.ZodOptional) return hasDefaults(schema.unwrap() as z.ZodType);
  return schema instanceof z.ZodObject && Object.values(schema.shape).some((v) => hasDefaults(v as z.ZodType));
}

type Override<T> = { [K in keyof T]?: T[K] extends readonly unknown[] ? T[K] : T[K] extends object ? Override<T[K]> : T[K] };
const override = <T extends z.ZodType>(schema: T) => overrideOf(schema) as unknown as z.ZodType<Override<z.infer<T>>>;

const NewOilSchema = z.partialRecord(measurandName, nonNegative).describe('New-oil reference values of this group.');

const GroupSettingsSchema = z
  .object({
    sumpLitres: positive.optional().describe('Oil volume of the compartment, for the make-up-oil correction.'),
    residualFraction: z.number().min(0).lt(1).optional().describe('Share of the old charge left after a drain (common practice: 0.05–0.2 engines, up to 0.4 hydraulics).'),
    chargeHours: positive.optional().describe('Planned oil-change interval in oil hours: the horizon of the time-to-limit forecasts.'),
    limits: levelsByMeasurand.optional().describe('Fixed caution/alarm levels per measurand.'),
    rateLimits: levelsByMeasurand.optional().describe('Rate-of-change levels in ppm per 100 h.'),
    newOil: NewOilSchema.optional(),
    condition: override(ConditionSchema).optional(),
    cleanliness: z.object({ target: iso4406Code }).strict().optional(),
    detection: override(DetectionSchema).optional(),
    population: override(PopulationSchema).optional(),
  })
  .strict();

export const GroupSchema = GroupSettingsSchema.extend({
  name: z.string().min(1).max(80),
  match: z
    .object({
      component: z.string().optional().describe('Component name, exactly.'),
      unit: z.string().optional().describe('A regular expression on the unit name.'),
    })
    .strict()
    .optional()
    .describe('Which components belong; an event that names its group belongs to that group.'),
}).strict();
export type GroupConfig = z.infer<typeof GroupSchema>;

export const ConfigSchema = z
  .object({
    redis: z
      .object({
        url: z.string().optional().describe('REDIS_URL wins when set.'),
        prefix: z.string().min(1).default('{wearshift}').describe('Key prefix; keep the braces (a hash tag) for Redis Cluster.'),
        partitions: z
          .number()
          .int()
          .min(1)
          .max(1024)
          .default(1)
          .describe('Partitions of the keys and queues by component (each its own hash tag, so a Redis Cluster spreads them over its shards). Every process must use the same number; see the README on sharding.'),
        cluster: z
          .object({
            nodes: z
              .array(z.string().regex(/^[^\s:]+:\d{1,5}$/, 'expected host:port'))
              .min(1)
              .describe('Seed nodes of a Redis Cluster (host:port); REDIS_CLUSTER_NODES wins when set.'),
          })
          .strict()
          .optional(),
      })
      .strict()
      .default({ prefix: '{wearshift}', partitions: 1 }),
    detection: DetectionSchema.default(DetectionSchema.parse({})),
    population: PopulationSchema.default(PopulationSchema.parse({})),
    condition: ConditionSchema.default(ConditionSchema.parse({})),
    forecast: ForecastSchema.default(DEFAULT_FORECAST),
    defaults: GroupSettingsSchema.omit({ detection: true, population: true, condition: true }).default({}).describe('Settings for every group unless the group says otherwise.'),
    groups: z.array(GroupSchema).default([]),
    backfill: z
      .object({ quietAfterDays: positive.default(30).describe('Findings on samples older than this when they arrive are recorded but page nobody.') })
      .strict()
      .default({ quietAfterDays: 30 }),
    incidents: IncidentsConfigSchema.default(IncidentsConfigSchema.parse({})),
    alarmFigures: AlarmFiguresSchema.default(AlarmFiguresSchema.parse({})).describe('Thresholds of the alarm-management key figures (ISA-18.2 / IEC 62682, EEMUA 191) in backtest, design noise and /metrics.'),
    escalation: EscalationSchema.default({ policies: [] }),
    channels: ChannelsSchema.default({ webhooks: [], mqtt: [], floodControl: DEFAULT_FLOOD_CONTROL }),
    opcua: OpcuaConfigSchema.optional().describe('The OPC UA Alarms & Conditions server for control rooms (see the README).'),
    http: z
      .object({
        maxConnectionsPerAddress: z
          .number()
          .int()
          .min(1)
          .optional()
          .describe('Most open sockets of the HTTP API from one socket peer; a further connection from it is closed at once. Default 64. Behind a reverse proxy every socket comes from the proxy (trustedProxies does not change that): raise it to what the proxy holds open. A peer listed in trustedProxies is counted by its own address, other IPv6 peers by their /64.'),
        maxEventClientsPerAddress: z
          .number()
          .int()
          .min(1)
          .optional()
          .describe('Most live-event streams (GET /v1/events) from one client address; a further one gets 429. Default 16. Behind a reverse proxy not listed in trustedProxies, raise it to the boards it serves (at most the 500 a process serves).'),
        maxFailedAuthPerAddress: z
          .number()
          .int()
          .min(1)
          .optional()
          .describe('Unknown tokens one client address may present in a minute; beyond it every request with a token from it gets 429 until the minute ends. Default 20. Behind a reverse proxy not listed in trustedProxies every client has the proxy\'s address, and one client guessing locks out all of them: list the proxy there.'),
        trustedProxies: z
          .array(z.string().superRefine((range, ctx) => {
            const problem = addressRangeProblem(range);
            if (problem !== undefined) ctx.addIssue({ code: 'custom', message: problem });
          }))
          .max(256)
          .optional()
          .describe('Reverse proxies (IP addresses or CIDR ranges, such as 10.0.0.7 or 10.0.0.0/8) whose X-Forwarded-For header is believed. A request from one of them counts, for maxFailedAuthPerAddress and maxEventClientsPerAddress, under the right-most address of X-Forwarded-For that is not itself a listed proxy; the proxy must append the address of its own peer to the header. From any other peer the header is ignored. maxConnectionsPerAddress still counts the proxy\'s own sockets: raise it to what the proxy holds open. At most 256 entries. Default none: X-Forwarded-For is ignored.'),
      })
      .strict()
      .optional()
      .describe('Per-address bounds of the HTTP API (`wearshift serve`, `wearshift api`) and the reverse proxies it believes; see the README, "Limits under load".'),
    display: z
      .object({
        timeZone: z
          .string()
          .min(1)
          .default('UTC')
          .refine((name) => isTimeZone(name), { message: 'not a time zone name this runtime knows (an IANA name such as UTC or Europe/Berlin)' })
          .describe('The site zone every time is shown in (board, e-mail, command line), ISO 8601 with its offset. Default UTC.'),
      })
      .strict()
      .default({ timeZone: 'UTC' }),
  })
  .strict()
  .superRefine((c, ctx) => {
    for (const issue of escalationChannelIssues(c.escalation, c.channels)) ctx.addIssue({ code: 'custom', ...issue });
    // A component's settings are looked up by its group's name: a second group of the same name would silently get
    // the first one's limits and detection settings.
    const firstOfName = new Map<string, number>();
    c.groups.forEach((g, i) => {
      const first = firstOfName.get(g.name);
      if (first === undefined) firstOfName.set(g.name, i);
      else ctx.addIssue({ code: 'custom', path: ['groups', i, 'name'], message: `"${g.name}" is also the name of groups.${first}; group names must be unique (groups.${i} would get the settings of groups.${first})` });
    });
    // The worker derives h and L from each budget when it starts; a budget no limit can meet is refused here, naming it.
    const topLevel = budgetIssue(c.detection, c.population);
    if (topLevel !== undefined) ctx.addIssue({ code: 'custom', path: ['detection', 'budget'], message: topLevel });
    c.groups.forEach((g, i) => {
      if (g.detection === undefined && g.population === undefined) return;
      const s = resolveSettings(c, { unit: '', component: '', group: g.name });
      const issue = budgetIssue(s.detection, s.population);
      if (issue !== undefined && issue !== topLevel) ctx.addIssue({ code: 'custom', path: ['groups', i, 'detection', 'budget'], message: `with this group's settings, ${issue}` });
    });
    // Every shelving is held to incidents.maxShelveHours: a OneShotShelve that promises longer would be refused by the store on every call.
    if (c.opcua !== undefined && c.opcua.oneShotShelveHours > c.incidents.maxShelveHours) {
      ctx.addIssue({
        code: 'custom',
        path: ['opcua', 'oneShotShelveHours'],
        message: `${c.opcua.oneShotShelveHours} h is longer than incidents.maxShelveHours (${c.incidents.maxShelveHours} h), the longest any shelving may last; set opcua.oneShotShelveHours to at most ${c.incidents.maxShelveHours}`,
      });
    }
    c.groups.forEach((g, i) => {
      if (g.match?.unit === undefined) return;
      try {
        new RegExp(g.match.unit);
      } catch (e) {
        ctx.addIssue({ code: 'custom', path: ['groups', i, 'match', 'unit'], message: `not a valid regular expression: ${(e as Error).message}` });
      }
    });
  });
export type Config = z.infer<typeof ConfigSchema>;

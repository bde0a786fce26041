/**
 * Resolves the settings that apply to one component: the event's own group, else the first configured
 * group whose match fits, else a group named after the component (like-for-like by compartment name).
 */
import type { Condition, Config, Detection, GroupConfig, Levels, Population } from './config.ts';
import type { ForecastConfig } from './forecastConfig.ts';
import type { Measurand } from './measurands.ts';

export interface ComponentSettings {
  readonly group: string;
  readonly sumpLitres?: number;
  /** Share of the previous charge left in the sump after a drain. */
  readonly residualFraction: number;
  /** True when neither the group nor the defaults set `residualFraction`: the built-in share stands in. */
  readonly residualFractionDefaulted?: boolean;
  readonly limits: Readonly<Partial<Record<Measurand, Levels>>>;
  readonly rateLimits: Readonly<Partial<Record<Measurand, Levels>>>;
  readonly newOil: Readonly<Partial<Record<Measurand, number>>>;
  readonly condition: Condition;
  readonly cleanlinessTarget?: string;
  readonly detection: Detection;
  readonly population: Population;
  /** Planned oil-change interval in oil hours, when the group sets one (forecast horizon). */
  readonly chargeHours?: number;
  /** Time-to-limit forecasts; absent: the defaults of forecastConfig.ts. */
  readonly forecast?: ForecastConfig;
}

/** Common practice: about 10 % of an engine charge stays behind after a drain (5–20 % engines, up to 40 % hydraulics). */
export const DEFAULT_RESIDUAL_FRACTION = 0.1;

export function groupOf(config: Config, c: { unit: string; component: string; group?: string }): string {
  if (c.group !== undefined) return c.group;
  return matchingGroup(config, c)?.name ?? c.component;
}

function matchingGroup(config: Config, c: { unit: string; component: string }): GroupConfig | undefined {
  return config.groups.find(
    (g) =>
      g.match !== undefined &&
      (g.match.component === undefined || g.match.component === c.component) &&
      (g.match.unit === undefined || new RegExp(g.match.unit).test(c.unit)),
  );
}

export function resolveSettings(config: Config, c: { unit: string; component: string; group?: string }): ComponentSettings {
  const group = groupOf(config, c);
  const g = config.groups.find((x) => x.name === group);
  const d = config.defaults;
  const sumpLitres = g?.sumpLitres ?? d.sumpLitres;
  const cleanlinessTarget = g?.cleanliness?.target ?? d.cleanliness?.target;
  const chargeHours = g?.chargeHours ?? d.chargeHours;
  return {
    group,
    residualFraction: g?.residualFraction ?? d.residualFraction ?? DEFAULT_RESIDUAL_FRACTION,
    ...(g?.residualFraction === undefined && d.residualFraction === undefined && { residualFractionDefaulted: true }),
    limits: { ...d.limits, ...g?.limits },
    rateLimits: { ...d.rateLimits, ...g?.rateLimits },
    newOil: { ...d.newOil, ...g?.newOil },
    condition: mergeOverride(config.condition, g?.condition),
    detection: mergeOverride(config.detection, g?.detection),
    population: mergeOverride(config.population, g?.population),
    forecast: config.forecast,
    ...(chargeHours !== undefined && { chargeHours }),
    ...(sumpLitres !== undefined && { sumpLitres }),
    ...(cleanlinessTarget !== undefined && { cleanlinessTarget }),
  };
}

/** A group's override over the top-level section, field by field (nested objects too; lists replace). */
function mergeOverride<T extends object>(base: T, over: unknown): T {
  if (over === undefined || over === null) return base;
  const out: Record<string, unknown> = { ...(base as Record<string, unknown>) };
  for (const [k, v] of Object.entries(over as Record<string, unknown>)) {
    if (v === undefined) continue;
    const b = out[k];
    out[k] = isPlainObject(v) && isPlainObject(b) ? mergeOverride(b, v) : v;
  }
  return out as T;
}

function isPlainObject(v: unknown): v is Record<string, unknown> {
  return typeof v === 'object' && v !== null && !Array.isArray(v);
}

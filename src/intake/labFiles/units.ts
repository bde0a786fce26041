/**
 * Unit conversion from what a lab prints to the measurand catalogue's unit. Only conversions that hold by
 * definition are made: ppm ≡ mg/kg (mass fraction, 1 ppm = 1 mg/kg), cSt ≡ mm²/s (1 cSt = 1 mm²/s by the
 * definition of the centistokes), % (mass) ↔ ppm with 1 % = 10 000 ppm (used for water). Everything else,
 * say a viscosity in SUS or an iron reading in %, is refused with the reason: guessing a unit would put a
 * wrong number into a wear trend.
 */
import { MEASURANDS, type Measurand } from '../../domain/measurands.ts';

/** Spellings labs use, folded (lower case, no spaces, ² as 2) onto one canonical unit each. */
const SPELLINGS: Record<string, string> = {
  ppm: 'ppm',
  'mg/kg': 'ppm',
  'ppm(m/m)': 'ppm',
  'ppmw': 'ppm',
  '%': '%',
  'wt%': '%',
  '%wt': '%',
  '%(m/m)': '%',
  'mass%': '%',
  cst: 'mm2/s',
  'mm2/s': 'mm2/s',
  'mm^2/s': 'mm2/s',
  'mgkoh/g': 'mgKOH/g',
  'a/cm': 'A/cm',
  'abs/cm': 'A/cm',
  index: 'index',
  code: 'code',
  'per ml': 'per mL',
  '/ml': 'per mL',
  'perml': 'per mL',
  'particles/ml': 'per mL',
};

/** Factor to multiply by, from a canonical unit to another; identity pairs are implied. */
const FACTORS: Record<string, number> = {
  '%->ppm': 10_000,
  'ppm->%': 1 / 10_000,
};

export function canonicalUnit(raw: string): string | undefined {
  const folded = raw.trim().toLowerCase().replace(/²/g, '2').replace(/\s+/g, '');
  return SPELLINGS[folded] ?? SPELLINGS[raw.trim().toLowerCase()];
}

/** The catalogue unit of a measurand in canonical spelling. */
function targetUnit(m: Measurand): string {
  return canonicalUnit(MEASURANDS[m].unit) ?? MEASURANDS[m].unit;
}

export type Conversion = { ok: true; factor: number } | { ok: false; reason: string };

/** How to turn a reading in `unit` into the catalogue unit of `m`. An empty or absent unit means the catalogue unit. */
export function conversionFor(m: Measurand, unit: string | undefined): Conversion {
  if (unit === undefined || unit.trim() === '') return { ok: true, factor: 1 };
  const from = canonicalUnit(unit);
  const to = targetUnit(m);
  if (from === undefined) return { ok: false, reason: `unit "${unit}" is not known; ${m} is kept in ${MEASURANDS[m].unit}` };
  if (from === to) return { ok: true, factor: 1 };
  const factor = FACTORS[`${from}->${to}`];
  if (factor === undefined || !(m === 'water' || MEASURANDS[m].unit === '%')) return { ok: false, reason: `unit "${unit}" does not convert to ${MEASURANDS[m].unit} for ${m}` };
  return { ok: true, factor };
}

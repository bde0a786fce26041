/**
 * The measurand catalogue: every reading kind the worker understands, with its kind and unit of measure.
 * Element symbols follow the periodic table; property names are short lower-case words as labs print them.
 */

export type MeasurandKind = 'wear' | 'contaminant' | 'additive' | 'condition' | 'cleanliness';

export interface MeasurandInfo {
  readonly kind: MeasurandKind;
  readonly unit: string;
  readonly label: string;
  /** Where a wear metal usually comes from (common practice; the lab and the equipment maker know the metallurgy of a given machine). */
  readonly origin?: string;
}

const element = (kind: MeasurandKind, label: string, origin?: string): MeasurandInfo => ({ kind, unit: 'ppm', label, ...(origin !== undefined && { origin }) });

export const MEASURANDS = {
  // Wear metals (ICP/RDE spectroscopy, mg/kg)
  Fe: element('wear', 'iron', 'gears, bearings, shafts, liners'),
  Cu: element('wear', 'copper', 'bushings, thrust washers, coolers'),
  Al: element('wear', 'aluminium', 'pistons, pump housings, thrust washers'),
  Cr: element('wear', 'chromium', 'piston rings, plated shafts, bearing steels'),
  Pb: element('wear', 'lead', 'plain-bearing overlays'),
  Sn: element('wear', 'tin', 'plain-bearing overlays, bronze parts'),
  Ni: element('wear', 'nickel', 'bearing steels, valve gear'),
  Ag: element('wear', 'silver'),
  Ti: element('wear', 'titanium'),
  Mn: element('wear', 'manganese'),
  Sb: element('wear', 'antimony'),
  Cd: element('wear', 'cadmium'),
  pq: { kind: 'wear', unit: 'index', label: 'ferrous debris (PQ index)' },
  // Contaminants
  Si: element('contaminant', 'silicon (dirt)'),
  Na: element('contaminant', 'sodium'),
  K: element('contaminant', 'potassium'),
  Li: element('contaminant', 'lithium'),
  V: element('contaminant', 'vanadium'),
  water: { kind: 'contaminant', unit: 'ppm', label: 'water' },
  fuel: { kind: 'contaminant', unit: '%', label: 'fuel dilution' },
  soot: { kind: 'contaminant', unit: '%', label: 'soot' },
  glycol: { kind: 'contaminant', unit: '%', label: 'glycol (coolant)' },
  // Additive elements
  Ca: element('additive', 'calcium'),
  Mg: element('additive', 'magnesium'),
  Zn: element('additive', 'zinc'),
  P: element('additive', 'phosphorus'),
  Ba: element('additive', 'barium'),
  Mo: element('additive', 'molybdenum'),
  B: element('additive', 'boron'),
  // Oil condition
  v40: { kind: 'condition', unit: 'mm²/s', label: 'viscosity at 40 °C' },
  v100: { kind: 'condition', unit: 'mm²/s', label: 'viscosity at 100 °C' },
  tbn: { kind: 'condition', unit: 'mg KOH/g', label: 'base number (TBN)' },
  tan: { kind: 'condition', unit: 'mg KOH/g', label: 'acid number (TAN)' },
  oxidation: { kind: 'condition', unit: 'A/cm', label: 'oxidation (FTIR)' },
  nitration: { kind: 'condition', unit: 'A/cm', label: 'nitration (FTIR)' },
  // Cleanliness
  iso4406: { kind: 'cleanliness', unit: 'code', label: 'ISO 4406 code' },
  p4: { kind: 'cleanliness', unit: 'per mL', label: 'particles ≥4 µm(c)' },
  p6: { kind: 'cleanliness', unit: 'per mL', label: 'particles ≥6 µm(c)' },
  p14: { kind: 'cleanliness', unit: 'per mL', label: 'particles ≥14 µm(c)' },
} as const satisfies Record<string, MeasurandInfo>;

export type Measurand = keyof typeof MEASURANDS;

export const MEASURAND_NAMES = Object.keys(MEASURANDS) as Measurand[];

export function isMeasurand(name: string): name is Measurand {
  return Object.hasOwn(MEASURANDS, name);
}

/** Where a wear metal usually comes from, when the catalogue says (common practice). */
export function originOf(m: Measurand): string | undefined {
  const info: MeasurandInfo = MEASURANDS[m];
  return info.origin;
}

export function measurandsOfKind(kind: MeasurandKind): Measurand[] {
  return MEASURAND_NAMES.filter((m) => MEASURANDS[m].kind === kind);
}

/**
 * The second sentence of a finding's explanation: what a reading beyond a level points to (a possibility, not a
 * diagnosis) and the next step a person takes. What a measurand usually points to is common practice; the lab and
 * the equipment maker know the given machine.
 */
import { MEASURANDS, originOf, type Measurand } from '../../domain/measurands.ts';

const RESAMPLE = 're-sample to confirm (same sample point, machine running at working temperature)';

const POINTS_TO: Partial<Record<Measurand, string>> = {
  Si: 'dirt getting in (breathers, seals, filters) or an antifoam additive',
  Na: 'coolant or water getting in, or a sodium-based additive',
  K: 'coolant getting in',
  Li: 'grease mixed into the oil',
  V: 'fuel residue (heavy fuel)',
  water: 'water getting in (condensation, seals, coolers) or a wet sample bottle',
  fuel: 'fuel dilution (injectors, long idling)',
  soot: 'incomplete combustion or blow-by',
  glycol: 'coolant getting into the oil, or a contaminated sample',
  v40: 'the wrong oil topped up, fuel dilution (thinner), or oxidation and contamination (thicker)',
  v100: 'the wrong oil topped up, fuel dilution (thinner), or oxidation and contamination (thicker)',
  tbn: 'the oil using up its reserve against acids',
  tan: 'the oil oxidising or taking up acids',
  oxidation: 'the oil ageing by heat and air',
  nitration: 'blow-by or combustion by-products in the oil',
  iso4406: 'particles getting in or a filter not holding them, or a dirty sample bottle',
  p4: 'particles getting in or a filter not holding them, or a dirty sample bottle',
  p6: 'particles getting in or a filter not holding them, or a dirty sample bottle',
  p14: 'particles getting in or a filter not holding them, or a dirty sample bottle',
};

/** "It may point to …; next: …." for a reading or a rate beyond a level. */
export function nextStep(m: Measurand): string {
  const kind = MEASURANDS[m].kind;
  if (kind === 'wear') {
    return `It may point to ${originOf(m) ?? 'the parts this metal comes from'} wearing faster; next: ${RESAMPLE}, and ask the lab to review the trend.`;
  }
  if (kind === 'additive') return `It may point to a different oil topped up or a mixed-up sample; next: check the top-up oil and the label, ${RESAMPLE}, and ask the lab.`;
  const what = POINTS_TO[m] ?? 'a change in the oil';
  const lab = m === 'glycol' || m === 'K' || m === 'Na' ? 'ask the lab for a glycol test' : 'ask the lab';
  return `It may point to ${what}; next: ${RESAMPLE}, and ${lab}.`;
}

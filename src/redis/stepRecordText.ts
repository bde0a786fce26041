/**
 * The stored form of a step of the findings log (the component's `steps` hash). Each finding repeats the unit,
 * component, group, sample and sampling time, which the step and its component already name: they are left out where
 * they equal the step's (the group: the first finding's, kept once as `g`) and put back when the record is read. A
 * record written before holds them all and reads the same. Deflate already shares most of the repetition within a
 * record: the log of a component with 100 samples went from 13.7 to 13.4 KB (BENCHMARKS.md, *Backfill, latency and
 * storage measured again*).
 */
import type { Finding } from '../domain/finding.ts';
import type { ComponentRef, StepRecord } from '../pipeline/ports.ts';
import { compactValue, expandValue } from './compactText.ts';

type Shared = 'unit' | 'component' | 'group' | 'sampleId' | 'sampledAt';
type StoredFinding = Omit<Finding, Shared> & Partial<Pick<Finding, Shared>>;
interface StoredStep extends Omit<StepRecord, 'findings'> {
  readonly g?: string;
  readonly findings: readonly StoredFinding[];
}

export function stepRecordText(ref: ComponentRef, step: StepRecord): string | Buffer {
  const group = step.findings[0]?.group;
  const stored: StoredStep = {
    ...step,
    ...(group !== undefined && { g: group }),
    findings: step.findings.map(({ unit, component, group: own, sampleId, sampledAt, ...rest }) => ({
      ...(unit !== ref.unit && { unit }),
      ...(component !== ref.component && { component }),
      ...(own !== group && { group: own }),
      ...(sampleId !== step.sampleId && { sampleId }),
      ...(sampledAt !== step.sampledAt && { sampledAt }),
      ...rest,
    })),
  };
  return compactValue(JSON.stringify(stored));
}

export function stepRecordOf(ref: ComponentRef, text: string | Buffer): StepRecord {
  const { g, findings, ...step } = JSON.parse(expandValue(text)) as StoredStep;
  return {
    ...step,
    findings: findings.map(({ unit, component, group, sampleId, sampledAt, ...rest }) => ({
      unit: unit ?? ref.unit,
      component: component ?? ref.component,
      group: group ?? g!,
      sampleId: sampleId ?? step.sampleId,
      sampledAt: sampledAt ?? step.sampledAt,
      ...rest,
    })) as Finding[],
  };
}

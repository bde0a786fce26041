/**
 * The board runs in the browser and carries its own copies of the one severity rule, the evidence order, the one
 * time format and the words for sample verdicts and messages held back (src/board/incidentText.js,
 * src/board/format.js). They must read exactly as the server's (src/notify/message.ts, src/notify/format.ts,
 * src/incidents/model.ts) that e-mails, pages and the command line use, for every severity pair, every verdict and
 * reason, and for instants across zones with and without summer time.
 */
import { beforeAll, describe, expect, it } from 'vitest';
import { bySeverity, severityWords, type MessageSeverity } from '../../src/notify/message.ts';
import { formatTime, timeZoneNote } from '../../src/notify/format.ts';
import { FORECAST_CAUTION } from '../../src/domain/caution.ts';
import { CHARTLESS_CHECKS, SAMPLE_WIDE_CHECKS, SAMPLE_WIDE_WORDS, SAMPLING_CHECKS, subjectOf } from '../../src/domain/finding.ts';
import { ADVISORY_HEADING } from '../../src/channels/email/emailRender.ts';
import {
  closureText,
  NO_LONGER_HOLD,
  notifiedTargetsText,
  sampleVerdictText,
  withdrawnEvidenceText,
  type ClosedHow,
  type ClosingVerdict,
  type NotifiedEntry,
  type SampleVerdict,
  type WithdrawnBecause,
} from '../../src/incidents/model.ts';

interface BoardText {
  FORECAST_CAUTION: string;
  ADVISORY_HEADING: string;
  severityWords(severity: string, peak?: string): string;
  bySeverity<T>(findings: readonly T[]): T[];
  sampleVerdictText(entry: object): string;
  closingVerdictText(closure: object): string;
  closureText(closure: object): string;
  NO_LONGER_HOLD: string;
  withdrawnEvidenceText(findings: readonly object[] | undefined): string;
  withdrawnFindingText(finding: object, closure?: object): string;
  notifiedTargetsText(entry: object): string;
  timelineText(entry: object): string;
  SAMPLE_WIDE_CHECKS: readonly string[];
  SAMPLE_WIDE_WORDS: Readonly<Record<string, string>>;
  CHARTLESS_CHECKS: readonly string[];
  subjectOf(f: object): string;
  measurandsOf(incident: object): string[];
}
interface BoardFormat {
  formatTime(iso: string): string;
  timeZoneNote(): string;
}

let text: BoardText;
let format: BoardFormat;
let session: { timeZone: string };

beforeAll(async () => {
  // The board's session module reads the tab's sessionStorage when loaded; an empty one stands in for it.
  (globalThis as { sessionStorage?: unknown }).sessionStorage ??= { getItem: () => null, setItem: () => undefined, removeItem: () => undefined };
  // @ts-expect-error a plain JavaScript module of the board, without type declarations
  text = (await import('../../src/board/incidentText.js')) as BoardText;
  // @ts-expect-error a plain JavaScript module of the board, without type declarations
  format = (await import('../../src/board/format.js')) as BoardFormat;
  // @ts-expect-error a plain JavaScript module of the board, without type declarations
  session = ((await import('../../src/board/session.js')) as { session: { timeZone: string } }).session;
});

const SEVERITIES: readonly MessageSeverity[] = ['watch', 'caution', 'alarm'];

describe("the board's copies", () => {
  it('write every severity with its peak as the server does', () => {
    for (const severity of SEVERITIES) {
      for (const peak of [undefined, ...SEVERITIES]) expect(text.severityWords(severity, peak), `${severity} / ${peak}`).toBe(severityWords(severity, peak));
    }
    expect(text.severityWords('watch', 'caution')).toBe('watch (peak caution)');
  });

  it('carry the caution beside forecasts word for word', () => {
    expect(text.FORECAST_CAUTION).toBe(FORECAST_CAUTION);
  });

  it('head the advisory findings of a sample as the e-mail does', () => {
    expect(text.ADVISORY_HEADING).toBe(ADVISORY_HEADING);
  });

  it('say what a finding is about as the server does: the sample for a sampling check of the whole sample', () => {
    expect(text.SAMPLE_WIDE_CHECKS).toEqual([...SAMPLE_WIDE_CHECKS]);
    for (const rule of ['sampling', 'limit']) {
      for (const check of [undefined, ...SAMPLING_CHECKS]) expect(text.subjectOf({ measurand: 'Cu', rule, check }), `${rule} ${check}`).toBe(subjectOf({ measurand: 'Cu', rule, check }));
    }
    const entry = { kind: 'finding', at: '2026-05-04T09:00:00Z', sampleId: 'S-7', change: 'raised', measurand: 'Cu', rule: 'sampling', check: 'duplicate-bottle', severity: 'caution' };
    expect(text.timelineText(entry)).toMatch(/: sample sampling raised \(caution\) \(sample S-7\)$/);
    expect(text.measurandsOf({ evidence: [entry] })).toEqual([]);
  });

  it('chart a sample-wide finding by its metal where that metal shows the fault, as the e-mail does, and none where it only files it', () => {
    expect(text.CHARTLESS_CHECKS).toEqual([...CHARTLESS_CHECKS]);
    const newOil = { measurand: 'Fe', rule: 'sampling', check: 'new-oil-mid-charge', severity: 'caution' };
    const twin = { measurand: 'Cu', rule: 'sampling', check: 'duplicate-bottle', severity: 'caution' };
    expect(text.subjectOf(newOil)).toBe('sample');
    expect(text.measurandsOf({ evidence: [newOil] })).toEqual(['Fe']);
    expect(text.measurandsOf({ evidence: [twin, newOil] })).toEqual(['Fe']);
    expect(text.measurandsOf({ evidence: [twin] })).toEqual([]);
  });

  it('order evidence most severe first, then furthest beyond its limit, as the server does', () => {
    const findings = [
      { id: 'a', severity: 'watch', value: 9, threshold: 3 },
      { id: 'b', severity: 'caution', value: 4, threshold: 2 },
      { id: 'c', severity: 'alarm', value: 11, threshold: 10 },
      { id: 'd', severity: 'caution', value: 30, threshold: 10 },
      { id: 'e', severity: 'watch' },
    ];
    const order = (list: readonly { id: string }[]) => list.map((f) => f.id).join('');
    expect(order(text.bySeverity(findings))).toBe(order(bySeverity(findings)));
    expect(order(bySeverity(findings))).toBe('cdbae');
  });

  it('write a sample verdict and a message held back as the command line does', () => {
    for (const verdict of ['confirmed', 'rejected', 'withdrawn'] as SampleVerdict[]) {
      const entry = { kind: 'sample-verdict', at: '2026-03-01T08:00:00Z', sampleId: 'LAB-0042', verdict, by: 'R. Tanaka' } as const;
      expect(text.sampleVerdictText(entry), verdict).toBe(sampleVerdictText(entry));
      expect(text.timelineText(entry)).toContain(`: ${sampleVerdictText(entry)}`);
    }
    // An incident a verdict on its opening sample closed: who judged which sample how, never "withdrawn".
    for (const verdict of ['confirmed', 'rejected'] as ClosingVerdict[]) {
      const entry = { kind: 'closed', at: '2026-03-01T08:00:00Z', how: 'sample-verdict', by: 'Jo Sampler', sampleId: 'QX-1-026', verdict } as const;
      expect(text.closingVerdictText(entry), verdict).toBe(closureText(entry));
      expect(text.timelineText(entry)).toContain(`: ${closureText(entry)}`);
    }
    expect(closureText({ how: 'sample-verdict', by: 'Jo Sampler', sampleId: 'QX-1-026', verdict: 'rejected' })).toBe('closed: sample QX-1-026 rejected by Jo Sampler (sample judged wrong; kept out of the trend)');
    for (const because of ['acknowledged', 'shelved', 'closed', 'returned'] as WithdrawnBecause[]) {
      const entry: NotifiedEntry = {
        kind: 'notified',
        at: '2026-03-01T08:00:00Z',
        type: 'wearshift.incident.escalated',
        tier: 1,
        eventSeq: 3,
        targets: ['email:duty@plant.example', 'webhook:ops'],
        reason: 'not acknowledged 30 min after it was announced: escalated to tier 1',
        withdrawn: [{ target: 'webhook:ops', tier: 1, at: '2026-03-01T08:05:00Z', because, reason: 'the incident changed' }],
      };
      expect(text.notifiedTargetsText(entry), because).toBe(notifiedTargetsText(entry));
      expect(notifiedTargetsText(entry)).toMatch(/^email:duty@plant\.example, webhook:ops \(not sent: [a-z ]+ meanwhile\)$/);
    }
    expect(notifiedTargetsText({ targets: ['webhook:ops'], withdrawn: [{ target: 'webhook:ops', tier: 1, at: '2026-03-01T08:05:00Z', because: 'acknowledged', reason: '' }] })).toBe('webhook:ops (not sent: acknowledged meanwhile)');
    expect(text.notifiedTargetsText({ targets: ['webhook:ops'] })).toBe('webhook:ops');
    // An earlier attempt that ended without an answer: the message may have arrived, and both copies say so.
    const uncertain = { targets: ['webhook:ops'], withdrawn: [{ target: 'webhook:ops', tier: 1, at: '2026-03-01T08:05:00Z', because: 'acknowledged' as const, reason: '', attemptedAt: '2026-03-01T08:01:00.000Z' }] };
    expect(notifiedTargetsText(uncertain)).toBe('webhook:ops (not sent again: acknowledged meanwhile; an attempt begun at 2026-03-01T08:01:00.000Z may have reached it)');
    expect(text.notifiedTargetsText(uncertain)).toBe(notifiedTargetsText(uncertain));
  });

  it('write why an incident was closed, and what a withdrawn one stood on, as the closing message does', () => {
    for (const how of ['acknowledged-and-returned', 'resolved', 'returned-unannounced', 'withdrawn'] as ClosedHow[]) {
      expect(text.closureText({ how }), how).toBe(closureText({ how }));
    }
    const withdrawn = { kind: 'closed', at: '2026-05-04T09:00:00Z', how: 'withdrawn' } as const;
    expect(text.timelineText(withdrawn)).toContain(`: ${closureText(withdrawn)}`);
    expect(text.NO_LONGER_HOLD).toBe(NO_LONGER_HOLD);
    const stood = [
      { measurand: 'Fe', rule: 'limit', severity: 'caution', sampleId: 'D-16-2', explanation: 'Fe 60 ppm is above the caution level 50 ppm.' },
      { measurand: 'Cu', rule: 'rate', severity: 'watch', sampleId: 'D-16-2', explanation: 'Cu rises.' },
    ] as const;
    expect(text.withdrawnEvidenceText(stood)).toBe(withdrawnEvidenceText(stood));
    expect(withdrawnEvidenceText(stood)).toBe('the findings it stood on no longer hold: Fe (limit, caution), Cu (rate, watch) of sample D-16-2');
    // A sampling finding about the whole sample stood on the sample, not on the metal it is filed under.
    const bottle = [{ measurand: 'Cu', rule: 'sampling', check: 'duplicate-bottle', severity: 'caution', sampleId: 'D-16-3', explanation: 'All 9 readings are identical.' }] as const;
    expect(text.withdrawnEvidenceText(bottle)).toBe(withdrawnEvidenceText(bottle));
    // …and is named by its check in words, as the e-mail subject names it.
    expect(withdrawnEvidenceText(bottle)).toBe('the findings it stood on no longer hold: sample (duplicated bottle, caution) of sample D-16-3');
    expect(text.SAMPLE_WIDE_WORDS).toEqual(SAMPLE_WIDE_WORDS);
    for (const check of SAMPLING_CHECKS) {
      const f = { measurand: 'Cu', rule: 'sampling', check, severity: 'watch', sampleId: 'D-16-4' } as const;
      expect(text.withdrawnEvidenceText([f]), check).toBe(withdrawnEvidenceText([f]));
    }
    expect(text.withdrawnEvidenceText([])).toBe(withdrawnEvidenceText([]));
    expect(text.withdrawnEvidenceText(undefined)).toBe('');
    // A finding set aside is never shown as current: the card says it no longer holds before what it first said.
    expect(text.withdrawnFindingText(stood[0])).toMatch(/^no longer holds .*as first reported for sample D-16-2: Fe 60 ppm/);
    // A sampling finding of a sample a responder rejected was borne out, not withdrawn (as the closing message says).
    const twin = { measurand: 'Cu', rule: 'sampling', check: 'duplicate-bottle', severity: 'caution', sampleId: 'GB-8-L1', explanation: 'All 5 readings are identical.' };
    const rejected = { how: 'sample-verdict', at: '2026-05-04T09:00:00Z', by: 'Ben Sampler', sampleId: 'GB-8-L1', verdict: 'rejected' };
    expect(text.withdrawnFindingText(twin, rejected)).toMatch(/^borne out: Ben Sampler judged sample GB-8-L1 wrong, as this finding said/);
    expect(text.withdrawnFindingText(twin, { ...rejected, verdict: 'confirmed' })).toMatch(/^no longer holds /);
    expect(text.withdrawnFindingText(stood[0], rejected)).toMatch(/^no longer holds /);
    // A return to normal with the clean samples that returned it.
    expect(text.timelineText({ kind: 'returned', at: '2026-05-04T09:00:00Z', sampleId: 'R-4', cleanSamples: 2 })).toMatch(/: returned to normal \(sample R-4\), after 2 samples without findings$/);
  });

  it('write times in the site zone exactly as e-mails and the command line do', () => {
    const instants = ['2026-03-01T08:00:59.999Z', '2026-03-08T06:59:00Z', '2026-03-08T07:00:00Z', '2026-07-01T12:00:00Z', '2026-10-25T00:30:00Z', '2026-12-31T23:59:00Z', 'not a time'];
    for (const zone of ['UTC', 'Etc/UTC', 'America/New_York', 'Europe/Berlin', 'Asia/Kathmandu', 'Asia/Kolkata', 'Australia/Adelaide']) {
      session.timeZone = zone;
      for (const iso of instants) expect(format.formatTime(iso), `${iso} in ${zone}`).toBe(formatTime(iso, zone));
      expect(format.timeZoneNote()).toBe(timeZoneNote(zone));
    }
  });
});

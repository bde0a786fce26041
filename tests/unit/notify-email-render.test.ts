import { describe, expect, it } from 'vitest';
import { ADVISORY_CAUTION, renderIncidentEmail } from '../../src/channels/email/emailRender.ts';
import { renderFloodSummaryEmail } from '../../src/channels/email/floodSummaryEmail.ts';
import type { FloodSummary } from '../../src/notify/floodControl.ts';
import { incidentMessage } from './notify-fixtures.ts';

const options = {
  from: 'wearshift <alerts@plant.example>',
  to: 'oncall@plant.example',
  ackUrl: 'https://wearshift.plant.example/ack/eyJ2IjoxfQ.sig?x=1&y=2',
  ackExpiresAt: new Date('2026-03-04T08:00:00Z'),
};

describe('incident e-mail', () => {
  it('says what changed, the evidence against its limit and since when, in both parts', () => {
    const mail = renderIncidentEmail(incidentMessage(), options);
    expect(mail.subject).toBe('[wearshift caution] PS2-P3 / gearbox: New incident — Fe: cusum, rate');
    for (const part of [mail.text, mail.html]) {
      expect(part).toContain('Fe wear rate shifted up (CUSUM 5.6 above its limit 5.0) since LAB-0042.');
      expect(part).toContain('CUSUM statistic 5.612 against its limit 5');
      expect(part).toContain('wear rate 4.5 ppm per 100 h');
      expect(part).toContain('sample LAB-0042, drawn 2026-03-01T08:00Z');
      // The link leads to the board's page for the incident, not to the JSON API.
      expect(part).toContain('https://wearshift.plant.example/incidents/INC-2026-0007');
      expect(part).not.toContain('/v1/incidents/');
      expect(part).toContain('2026-03-04T08:00Z');
      expect(part).toContain('Times are ISO 8601 in UTC (Z).');
    }
    expect(mail.text).toContain(ADVISORY_CAUTION);
    expect(mail.html).toContain(ADVISORY_CAUTION.replace(/'/g, '&#39;'));
  });

  it('shows the advisory findings of the same sample under a heading of their own, apart from the evidence and the severity', () => {
    const band = { measurand: 'Cu', subject: 'Cu', rule: 'population', severity: 'caution', value: 31, threshold: 24, basis: 'reading', sampleId: 'LAB-0042', sampledAt: '2026-03-01T08:00:00Z', explanation: 'Cu above the gearbox population band for 750 oil hours (mean + 2σ).' } as const;
    const mail = renderIncidentEmail(incidentMessage({ advisoryFindings: [band] }), options);
    const heading = 'Also on this sample (advisory, opens no incident)';
    const lines = mail.text.split('\n');
    const at = lines.indexOf(heading);
    // After the evidence, before the results: one line of what it is, one of what it points to.
    expect(at).toBeGreaterThan(lines.indexOf('Evidence'));
    expect(at).toBeLessThan(lines.indexOf('Last results'));
    expect(lines.slice(at + 1, at + 3)).toEqual([
      '- Cu, population rule, caution: reading 31 ppm against its limit 24 ppm (sample LAB-0042, drawn 2026-03-01T08:00Z).',
      '  Cu above the gearbox population band for 750 oil hours (mean + 2σ).',
    ]);
    expect(mail.html).toContain(`<h3>${heading}</h3><ul><li>Cu, population rule, caution: reading 31 ppm against its limit 24 ppm (sample LAB-0042, drawn 2026-03-01T08:00Z).<br>Cu above the gearbox population band for 750 oil hours (mean + 2σ).</li></ul>`.replace('</h3><ul>', '</h3>\n<ul>'));
    // The subject names the evidence only, and the caution stays in both parts.
    expect(mail.subject).toBe('[wearshift caution] PS2-P3 / gearbox: New incident — Fe: cusum, rate');
    expect(mail.text).toContain(ADVISORY_CAUTION);
    expect(mail.html).toContain(ADVISORY_CAUTION.replace(/'/g, '&#39;'));
    // Without advisory findings there is no such heading.
    const plain = renderIncidentEmail(incidentMessage(), options);
    expect(plain.text).not.toContain(heading);
    expect(plain.html).not.toContain(heading);
  });

  it('gives a PQ wear rate in index points per 100 h, the catalogue unit of PQ, not in ppm', () => {
    const pqRate = { measurand: 'pq', subject: 'pq', rule: 'rate', severity: 'caution', value: 12, threshold: 10, basis: 'rate', sampleId: 'LAB-0042', sampledAt: '2026-03-01T08:00:00Z', explanation: 'PQ rose.' } as const;
    const { text } = renderIncidentEmail(incidentMessage({ findings: [pqRate] }), options);
    expect(text).toContain('wear rate 12 index points per 100 h against its limit 10 index points per 100 h');
    expect(text).not.toContain('ppm per 100 h');
  });

  it('tabulates the last results with the findings’ measurands first', () => {
    const { text } = renderIncidentEmail(incidentMessage(), options);
    const lines = text.split('\n');
    const header = lines.findIndex((l) => l.startsWith('Sample'));
    expect(lines[header]?.split(/\s{2,}/)).toEqual(['Sample', 'Drawn', 'Oil h', 'Fe', 'Cu', 'Si']);
    expect(lines[header + 1]?.split(/\s{2,}/)).toEqual(['LAB-0038', '2026-01-05T08:00Z', '250', '12', '3', '<1']);
    expect(lines[header + 3]?.split(/\s{2,}/)).toEqual(['LAB-0042', '2026-03-01T08:00Z', '750', '28', '4', '2']);
  });

  it('keeps the acknowledgement link intact in text and correctly escaped in HTML', () => {
    const mail = renderIncidentEmail(incidentMessage(), options);
    expect(mail.text).toContain(options.ackUrl);
    expect(mail.html).toContain('href="https://wearshift.plant.example/ack/eyJ2IjoxfQ.sig?x=1&amp;y=2"');
  });

  it('leaves the link out once nothing is left to acknowledge', () => {
    for (const msg of [incidentMessage({ type: 'acknowledged' }, { acknowledgedBy: 'R. Okafor' }), incidentMessage({ type: 'closed' }), incidentMessage({ type: 'updated' }, { acknowledgedBy: 'R. Okafor' })]) {
      const mail = renderIncidentEmail(msg, options);
      expect(mail.text).not.toContain('/ack/');
      expect(mail.html).not.toContain('/ack/');
    }
    expect(renderIncidentEmail(incidentMessage({ type: 'acknowledged' }, { acknowledgedBy: 'R. Okafor' }), options).subject).toContain('Acknowledged by R. Okafor');
  });

  it('cannot be made to inject headers or markup through names from the lab feed', () => {
    const hostile = incidentMessage(
      { whatChanged: 'rise\r\nBcc: victim@elsewhere.example\u0000\u202e<b>x</b>', findings: [] },
      { unit: 'PS2\r\nX-Injected: yes', component: '<script>alert(1)</script>', id: 'INC-1\nBcc: a@b.example' },
    );
    const mail = renderIncidentEmail(hostile, options);
    for (const value of [mail.subject, ...Object.values(mail.headers)]) {
      expect(value).not.toMatch(/[\p{Cc}\u202e]/u);
    }
    expect(mail.headers['X-Wearshift-Incident']).toBe('INC-1 Bcc: a@b.example');
    expect(mail.html).not.toContain('<script>');
    expect(mail.html).toContain('&lt;script&gt;alert(1)&lt;/script&gt;');
    expect(mail.html).not.toContain('<b>x</b>');
  });

  it('gives a resend the same Message-ID and a new message a new one, in the sender’s domain', () => {
    const first = renderIncidentEmail(incidentMessage(), options).headers['Message-ID'];
    const again = renderIncidentEmail(incidentMessage(), options).headers['Message-ID'];
    const next = renderIncidentEmail(incidentMessage({ idempotencyKey: 'INC-2026-0007:updated:2' }), options).headers['Message-ID'];
    // RFC 5322 §3.6.4: msg-id = "<" id-left "@" id-right ">"
    expect(first).toMatch(/^<[0-9a-f]{32}\.message@plant\.example>$/);
    expect(again).toBe(first);
    expect(next).not.toBe(first);
    // One thread per incident: the same References on every message of it.
    expect(renderIncidentEmail(incidentMessage({ type: 'escalated' }), options).headers.References).toBe(renderIncidentEmail(incidentMessage(), options).headers.References);
  });

  it('refuses link targets that are not http(s)', () => {
    expect(() => renderIncidentEmail(incidentMessage(), { ...options, ackUrl: 'javascript:alert(1)' })).toThrow(/ackUrl must use http or https/);
    expect(() => renderIncidentEmail(incidentMessage({}, { url: 'board/INC-1' }), options)).toThrow(/incident.url must be an absolute/);
  });

  it('cuts an overlong subject to one line of bounded length', () => {
    const mail = renderIncidentEmail(incidentMessage({}, { unit: 'PS2-P3 '.repeat(40) }), options);
    expect(mail.subject.length).toBeLessThanOrEqual(180);
    expect(mail.subject.endsWith('…')).toBe(true);
  });

  it('says the headline once: the reason loses the words the headline already says', () => {
    const mail = renderIncidentEmail(incidentMessage({ whatChanged: 'new incident, caution: Fe (cusum, caution), Fe (rate, watch)' }), options);
    expect(mail.subject.toLowerCase().split('new incident').length - 1).toBe(1);
    expect(mail.text.toLowerCase().split('new incident').length - 1).toBe(1);
    expect(mail.text).toContain('Fe (cusum, caution), Fe (rate, watch)');
  });

  it('writes the severity by the one rule: the evidence\'s highest, the peak beside it when it was higher', () => {
    const later = incidentMessage({ type: 'updated' }, { severity: 'watch', peakSeverity: 'caution' });
    later.findings = later.findings.map((f) => ({ ...f, severity: 'watch' }));
    const mail = renderIncidentEmail(later, options);
    expect(mail.subject.startsWith('[wearshift watch (peak caution)] ')).toBe(true);
    expect(mail.text).toContain('PS2-P3 / gearbox: watch (peak caution).');
    // Evidence most severe first, so that the first line carries the incident's severity.
    const first = renderIncidentEmail(incidentMessage(), options).text.split('\n').find((l) => l.startsWith('- '));
    expect(first).toContain('cusum rule, caution');
  });

  it('writes a viscosity change and its limit as percentages, a reading and its limit in the same unit', () => {
    const msg = incidentMessage();
    msg.findings = [
      { measurand: 'v40', subject: 'v40', rule: 'condition', severity: 'alarm', value: 47.55, threshold: 20, basis: 'change', sampleId: 'LAB-0042', sampledAt: '2026-03-01T08:00:00Z', explanation: 'Viscosity rose.' },
      { measurand: 'tbn', subject: 'tbn', rule: 'condition', severity: 'caution', value: 5.5, threshold: 6, basis: 'reading', sampleId: 'LAB-0042', sampledAt: '2026-03-01T08:00:00Z', explanation: 'TBN fell.' },
    ];
    const { text } = renderIncidentEmail(msg, options);
    expect(text).toContain('change from new oil 47.55 % against its limit 20 %');
    expect(text).not.toContain('mm²/s against');
    expect(text).toContain('reading 5.5 mg KOH/g against its limit 6 mg KOH/g');
  });

  it('headlines a closed incident that came back as reopened, not as more evidence, and says the rest once', () => {
    const mail = renderIncidentEmail(
      incidentMessage({ type: 'updated', whatChanged: 'reopened after it had been closed; acknowledgement withdrawn, acknowledge again' }),
      options,
    );
    expect(mail.subject).toContain(': Reopened after it had been closed, acknowledge again — ');
    expect(mail.subject).not.toContain('New evidence');
    expect(mail.text.split('reopened after it had been closed').length - 1).toBe(0);
    expect(mail.text).toContain('acknowledgement withdrawn, acknowledge again');
    expect(mail.text).toContain('advises');
  });

  it('tells of a return to normal that nobody has acknowledged: still open, how to close it, the caution, and the link', () => {
    const msg = incidentMessage(
      { type: 'returned', whatChanged: 'returned to normal after 2 samples without findings; still unacknowledged', idempotencyKey: 'INC-2026-0007:returned:3' },
      { state: 'returned to normal, unacknowledged' },
    );
    const mail = renderIncidentEmail(msg, options);
    expect(mail.subject).toBe('[wearshift caution] PS2-P3 / gearbox: Readings back to normal, still to be acknowledged — earlier evidence Fe: cusum, rate');
    expect(mail.headers['X-Wearshift-Event']).toBe('returned');
    for (const part of [mail.text, mail.html.replace(/&#39;/g, "'")]) {
      expect(part).toContain('Readings back to normal, still to be acknowledged.');
      expect(part).toContain('nobody has acknowledged the incident yet: it stays open until someone does, and acknowledging it now closes it.');
      expect(part).toContain('Readings back to normal do not show that the cause is gone');
      // The findings are shown as what raised the incident, not as what the latest samples say.
      expect(part).toContain('Evidence that raised it (not seen in the latest samples)');
      expect(part).toContain('returned to normal after 2 samples without findings; still unacknowledged');
      expect(part).toContain(ADVISORY_CAUTION);
    }
    // It still asks for acknowledgement, so it carries the link.
    expect(mail.text).toContain(options.ackUrl);
    expect(mail.html).toContain('href="https://wearshift.plant.example/ack/eyJ2IjoxfQ.sig?x=1&amp;y=2"');
    // The other messages keep their plain heading and say nothing of a return.
    const opened = renderIncidentEmail(incidentMessage(), options).text;
    expect(opened).not.toContain('not seen in the latest samples');
    expect(opened).not.toContain('stays open until someone does');
  });

  it('shows times in the configured site zone with their offset, and names the zone', () => {
    // Europe/Berlin is UTC+1 in March 2026 (before the change to summer time on 29 March): IANA tz database.
    const { text } = renderIncidentEmail(incidentMessage(), { ...options, timeZone: 'Europe/Berlin' });
    expect(text).toContain('drawn 2026-03-01T09:00+01:00');
    expect(text).toContain('site zone Europe/Berlin');
  });
});

describe('alarm-flood summary e-mail', () => {
  const summary: FloodSummary = {
    channel: 'email',
    target: 'oncall@plant.example',
    window: { from: '2026-03-01T08:00:00.000Z', until: '2026-03-01T08:10:00.000Z' },
    maxMessages: 10,
    held: [{ incidentId: 'PS2-P3/gearbox@LAB-0042', unit: 'PS2-P3', component: 'gearbox', severity: 'alarm', type: 'opened', url: 'https://wearshift.plant.example/incidents/x', at: '2026-03-01T08:04:00.000Z' }],
  };

  it('writes its window in the configured site zone with the offset, and names the zone, as the incident e-mails do', () => {
    // Europe/Berlin is UTC+1 in March 2026 (before the change to summer time on 29 March): IANA tz database.
    const mail = renderFloodSummaryEmail(summary, { from: options.from, to: summary.target, timeZone: 'Europe/Berlin' });
    for (const part of [mail.text, mail.html]) {
      expect(part).toContain('between 2026-03-01T09:00+01:00 and 2026-03-01T09:10+01:00');
      expect(part).toContain('Times are ISO 8601 in the site zone Europe/Berlin, offset written with each time.');
      expect(part).not.toContain('2026-03-01T08:00:00.000Z');
    }
    expect(mail.text).toContain(ADVISORY_CAUTION);
  });

  it('writes its window in UTC, to the minute, when no zone is configured', () => {
    const { text } = renderFloodSummaryEmail(summary, { from: options.from, to: summary.target });
    expect(text).toContain('between 2026-03-01T08:00Z and 2026-03-01T08:10Z');
    expect(text).toContain('Times are ISO 8601 in UTC (Z).');
  });
});

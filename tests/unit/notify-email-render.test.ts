import { describe, expect, it } from 'vitest';
import { ADVISORY_CAUTION, renderIncidentEmail } from '../../src/channels/email/emailRender.ts';
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
    expect(mail.subject).toBe('[wearshift caution] PS2-P3 / gearbox: New incident — Fe wear rate shifted up (CUSUM 5.6 above its limit 5.0) since LAB-0042.');
    for (const part of [mail.text, mail.html]) {
      expect(part).toContain('Fe wear rate shifted up (CUSUM 5.6 above its limit 5.0) since LAB-0042.');
      expect(part).toContain('CUSUM statistic 5.612 against its limit 5');
      expect(part).toContain('wear rate 4.5 ppm per 100 h');
      expect(part).toContain('sample LAB-0042, drawn 2026-03-01 08:00 UTC');
      expect(part).toContain('https://wearshift.plant.example/v1/incidents/INC-2026-0007');
      expect(part).toContain('2026-03-04 08:00 UTC');
    }
    expect(mail.text).toContain(ADVISORY_CAUTION);
    expect(mail.html).toContain(ADVISORY_CAUTION.replace(/'/g, '&#39;'));
  });

  it('tabulates the last results with the findings’ measurands first', () => {
    const { text } = renderIncidentEmail(incidentMessage(), options);
    const lines = text.split('\n');
    const header = lines.findIndex((l) => l.startsWith('Sample'));
    expect(lines[header]?.split(/\s{2,}/)).toEqual(['Sample', 'Drawn', 'Oil h', 'Fe', 'Cu', 'Si']);
    expect(lines[header + 1]?.split(/\s{2,}/)).toEqual(['LAB-0038', '2026-01-05 08:00 UTC', '250', '12', '3', '<1']);
    expect(lines[header + 3]?.split(/\s{2,}/)).toEqual(['LAB-0042', '2026-03-01 08:00 UTC', '750', '28', '4', '2']);
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
    const mail = renderIncidentEmail(incidentMessage({ whatChanged: 'Fe '.repeat(200) }), options);
    expect(mail.subject.length).toBeLessThanOrEqual(180);
    expect(mail.subject.endsWith('…')).toBe(true);
  });
});

/**
 * An incident a corrected result withdraws (in-memory pipeline, real limit rule): the lab's revision takes away the
 * finding the incident stood on, so the incident is closed as withdrawn with its alarm no longer active, its evidence
 * set aside as no longer holding, and a closing message that carries no findings as current — its reason names what
 * no longer holds, beside the recent results as they stand. The e-mail says the same, with the caution.
 */
import { describe, expect, it } from 'vitest';
import { IncidentMessageSchema } from '../../src/contracts/eventSchemas.ts';
import { IncidentSchema } from '../../src/contracts/responseSchemas.ts';
import { renderIncidentEmail } from '../../src/channels/email/emailRender.ts';
import { ackSummary } from '../../src/http/server.ts';
import { renderAckPage } from '../../src/notify/ackPage.ts';
import { ADVISORY_CAUTION } from '../../src/domain/caution.ts';
import type { Incident, NotifyEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { incidentMessage } from '../../src/notify/incidentMessage.ts';
import type { EvaluationDeps } from '../../src/pipeline/evaluateStored.ts';
import { MemoryStore } from '../../src/pipeline/memory/memoryStore.ts';
import { settleComponent } from '../../src/pipeline/settleComponent.ts';
import { storeResult } from '../../src/pipeline/storeResult.ts';
import type { ResultEvent } from '../../src/domain/event.ts';
import { CONFIG, NOW, REF, result } from '../helpers/engineIronLimit.ts';


async function withdrawnByRevision() {
  const store = new MemoryStore({ config: CONFIG, now: () => NOW });
  const deps: EvaluationDeps = { store, ledger: store, config: CONFIG, rules: incidentRules(CONFIG), now: () => NOW, checkpointEvery: 5 };
  const post = async (r: ResultEvent) => {
    const stored = await storeResult(store, CONFIG, r, NOW);
    if (stored.outcome.evaluationDue) await settleComponent(deps, stored.sample);
  };
  await post(result('D-16-1', 1, 12));
  await post(result('D-16-2', 2, 60));
  const opened = store.outbox().filter((e): e is NotifyEffect => e.kind === 'notify');
  await post(result('D-16-2', 2, 20, 1));
  const closing = store.outbox().filter((e): e is NotifyEffect => e.kind === 'notify' && e.type === 'wearshift.incident.closed');
  const incident = store.incidents().find((i) => i.id === opened[0]?.incidentId) as Incident;
  return { store, opened, closing, incident };
}

describe('an incident a corrected result withdraws', () => {
  it('was opened by the first result, Fe 60 above the caution level 50', async () => {
    const { opened } = await withdrawnByRevision();
    expect(opened.map((e) => [e.type, e.target])).toEqual([['wearshift.incident.opened', 'ops']]);
    expect(opened[0]!.incident.findings).toMatchObject([{ measurand: 'Fe', rule: 'limit', severity: 'caution', value: 60, sampleId: 'D-16-2' }]);
  });

  it('is closed as withdrawn, no longer active, its findings set aside as no longer holding', async () => {
    const { incident } = await withdrawnByRevision();
    expect(incident.closed?.how).toBe('withdrawn');
    expect(incident.alarm).toBe('returned');
    expect(incident.evidence).toEqual([]);
    expect(incident.activeFindings).toEqual([]);
    expect(incident.context).toEqual([]);
    expect(incident.withdrawnEvidence).toMatchObject([{ measurand: 'Fe', rule: 'limit', severity: 'caution', value: 60, sampleId: 'D-16-2' }]);
    expect(IncidentSchema.safeParse(incident).success).toBe(true);
  });

  it('shows on the acknowledgement page how it was closed and that no severity of it stands', async () => {
    const { incident } = await withdrawnByRevision();
    const summary = ackSummary(incident, 'UTC');
    expect(summary.state).toMatch(/^closed — withdrawn: a late or corrected result/);
    expect(summary.setAside).toBe(true);
    const html = renderAckPage({ kind: 'closed', incident: summary });
    expect(html).toContain('none: nothing of it stands (last announced as caution)');
    expect(html).not.toMatch(/<th>Severity<\/th><td>▲/);
    // An incident not closed shows its severity as any other.
    expect(ackSummary({ ...incident, closed: null }, 'UTC').setAside).toBeUndefined();
  });

  it('tells those told of it with no finding as current: the reason names what no longer holds, beside the corrected result', async () => {
    const { store, closing } = await withdrawnByRevision();
    expect(closing.map((e) => e.target)).toEqual(['ops']);
    const effect = closing[0]!;
    expect(effect.incident.alarm).toBe('returned');
    expect(effect.incident.state).toBe('closed');
    const msg = incidentMessage(effect, (await store.revisions(REF)).map((r) => r.sample), 'https://wearshift.plant.example');
    expect(msg.findings).toEqual([]);
    expect(msg.advisoryFindings).toEqual([]);
    expect(msg.whatChanged).toBe(
      'withdrawn: a late or corrected result changed the history so that this incident no longer stands; the findings it stood on no longer hold: Fe (limit, caution) of sample D-16-2',
    );
    expect(msg.recentResults.find((r) => r.sampleId === 'D-16-2')?.readings.Fe).toBe('20');
    expect(JSON.stringify(msg)).not.toContain('above the caution level');
    expect(msg.advisory).toBe(ADVISORY_CAUTION);
    expect(IncidentMessageSchema.safeParse(msg).success).toBe(true);
  });

  it('reads the same in the e-mail: withdrawn, no evidence listed, the caution kept', async () => {
    const { store, closing } = await withdrawnByRevision();
    const msg = incidentMessage(closing[0]!, (await store.revisions(REF)).map((r) => r.sample), 'https://wearshift.plant.example');
    const mail = renderIncidentEmail(msg, { from: 'wearshift <alerts@plant.example>', to: 'oncall@plant.example' });
    for (const part of [mail.text, mail.html]) {
      expect(part).toContain('Withdrawn, no longer stands');
      expect(part).toContain('(none: the findings it stood on no longer hold, see What changed)');
      expect(part).toContain('Fe (limit, caution) of sample D-16-2');
      expect(part).not.toContain('no findings attached');
      expect(part).not.toMatch(/above the caution level|reading 60/);
    }
    expect(mail.text).toContain(ADVISORY_CAUTION);
    expect(mail.html).toContain(ADVISORY_CAUTION.replaceAll("'", '&#39;'));
  });
});

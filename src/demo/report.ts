/** The demo's printed story: the timeline per component and the summary, for people reading a terminal. */
import { ADVISORY_CAUTION } from '../domain/caution.ts';
import { RULE_FAMILIES } from '../domain/finding.ts';
import { DEMO_STORIES } from './fleet.ts';
import type { DemoReport } from './runDemo.ts';
import { formatTimeline } from './timeline.ts';
import { USUAL_RATE_UNIT } from './usualRateWord.ts';

/**
 * What `wearshift demo --keep-open` prints once the run is over: where the API and the board are, a viewer token to
 * look and a responder token to acknowledge, shelve and resolve on the board.
 */
export function formatKeepOpen(args: { apiUrl: string; board: boolean; viewerToken: string; responderToken: string }): string[] {
  return [
    '',
    `The API stays up at ${args.apiUrl}; the receivers keep taking mail and webhooks (not written out any more).`,
    args.board ? `Board: ${args.apiUrl}/ — paste a token when it asks: the viewer token to look, the responder token to acknowledge, shelve and resolve.` : 'This build serves no board at /; the API answers as below.',
    `Viewer token:    ${args.viewerToken}`,
    `Responder token: ${args.responderToken}`,
    `  curl -H 'Authorization: Bearer ${args.viewerToken}' ${args.apiUrl}/v1/incidents`,
    'Press Ctrl-C to stop.',
  ];
}

export function formatIntro(args: { redis: string; outDir: string; feedSeconds: number }): string[] {
  return [
    'wearshift demo — an invented water utility: 8 pump gearboxes, 4 prime-power generator engines, 3 press hydraulics, 18 months of oil samples.',
    'Three components carry a fault story:',
    ...DEMO_STORIES.map((s) => `  ${`${s.unit} ${s.component}`.padEnd(18)} ${s.what}`),
    `Redis: ${args.redis}. Mail and webhook receivers run inside the demo; what they receive is written to ${args.outDir}/.`,
    '',
  ];
}

export function formatReport(r: DemoReport, outDir: string): string[] {
  const lines: string[] = [];
  const width = Math.max(...r.timelines.map((t) => `${t.unit} ${t.component}`.length)) + 2;
  lines.push('', 'Timeline — when each rule first spoke, by sample date, beside the fixed limit:');
  lines.push('  (severity: watch = a change detected, no limit crossed < caution < alarm; "fall" = wear rate dropped, usually a sampling fault)');
  const quiet: string[] = [];
  for (const t of r.timelines) {
    if (t.firsts.length === 0) quiet.push(`${t.unit} ${t.component}`);
    else lines.push(`  ${`${t.unit} ${t.component}`.padEnd(width)}${formatTimeline(t)}`);
  }
  if (quiet.length > 0) lines.push(`  No findings (in control): ${quiet.join(', ')}`);

  lines.push('', 'Summary');
  lines.push(`  Results fed        ${r.resultsSent} lab reports in ${r.seconds.feed} s: ${r.resultsAccepted} accepted, ${r.resultsRejected} rejected`);
  lines.push(`  Findings per rule  ${RULE_FAMILIES.map((f) => `${f} ${r.findingsByRule[f]}`).join(' · ')}`);
  lines.push(`  Incidents          ${r.incidents.length}:`);
  for (const i of r.incidents) {
    const tier = i.highestTierTold < 0 ? 'nobody told' : `told up to tier ${i.highestTierTold}`;
    lines.push(`    ${i.id}  ${i.severity}, ${i.state}, ${tier}, ${i.notifications} messages${i.acknowledgedBy ? `, acknowledged by ${i.acknowledgedBy}` : ''}`);
  }
  if (r.incidents.some((i) => i.state === 'closed (withdrawn)')) {
    lines.push('                     (withdrawn: a corrected or late result changed the history so that it no longer stands; its findings are gone from the timeline above)');
  }
  const byRecipient = new Map<string, number>();
  for (const m of r.mails) byRecipient.set(m.to, (byRecipient.get(m.to) ?? 0) + 1);
  lines.push(`  E-mails            ${r.mails.length} received (${[...byRecipient].map(([to, n]) => `${to} ${n}`).join(', ')}) → ${outDir}/mail-*.eml`);
  const byType = new Map<string, number>();
  for (const w of r.webhooks) byType.set(w.type.replace(/^wearshift\.incident\./, ''), (byType.get(w.type.replace(/^wearshift\.incident\./, '')) ?? 0) + 1);
  const verified = r.webhooks.filter((w) => w.verified).length;
  lines.push(`  Webhooks           ${r.webhooks.length} received, ${verified} with a valid Standard Webhooks signature (${[...byType].map(([t, n]) => `${t} ${n}`).join(', ')}) → ${outDir}/webhook-*.json`);
  const acks = r.acknowledgements.filter((a) => a.outcome === 'acknowledged');
  if (acks.length === 0) lines.push('  Acknowledged       nothing');
  for (const [i, a] of acks.entries()) {
    const label = i === 0 ? '  Acknowledged       ' : '                     ';
    lines.push(`${label}${a.incidentId} by ${a.by}: link in mail #${a.mailSeq} to ${a.recipient}, confirmation page ${a.pageStatus}, form sent ${a.formStatus}`);
  }
  if (acks.length > 1) lines.push('                     (new evidence withdraws an acknowledgement and asks again, so each new mail was answered)');
  if (r.usualRate !== null) {
    lines.push(`  Usual rate         ${r.usualRate.incidentId}: ${r.usualRate.by} said the rate signalled at sample ${r.usualRate.sampleId} is the engine's usual one`);
    lines.push(`                     (the board's "This rate is usual for it"; HTTP ${r.usualRate.status}); the watch is now ${r.usualRate.stateAfter}`);
  }
  const escalated = r.incidents.filter((i) => i.highestTierTold >= 1);
  lines.push(`  Escalated          ${escalated.length === 0 ? 'nothing' : escalated.map((i) => `${i.unit} ${i.component} to tier ${i.highestTierTold}${i.acknowledgedBy ? ' (before it was acknowledged)' : ' (never acknowledged)'}`).join('; ')}`);

  lines.push('', 'How the demo plays the feed');
  lines.push(
    `  Dates: the fleet's calendar is moved ${Math.abs(r.shiftMonths)} month${Math.abs(r.shiftMonths) === 1 ? '' : 's'} ${r.shiftMonths <= 0 ? 'back' : 'forward'} so that its last report arrived within the last month (samples ${r.samplePeriod.from.slice(0, 10)} … ${r.samplePeriod.to.slice(0, 10)});`,
  );
  lines.push("    each date keeps its place within its month, so every run tells the same story (the group's statistics go by calendar month).");
  lines.push(`  Backfill: findings on samples older than backfill.quietAfterDays page nobody. Every demo sample is old by the time it is`);
  lines.push(`  fed, so demo/config.yaml sets quietAfterDays: ${r.quietAfterDays} and each report is treated as if it had just arrived. A real site keeps 30.`);
  lines.push(`  Escalation tiers are seconds apart here (0.1 and 0.2 minutes); a real policy waits hours.`);

  lines.push('', 'Checks');
  const mark = (ok: boolean) => (ok ? '✓' : '✗');
  const story = r.timelines.find((t) => t.unit === DEMO_STORIES[0]!.unit && t.component === DEMO_STORIES[0]!.component);
  lines.push(`  ${mark(r.checks.caughtBeforeFixedLimit)} ${DEMO_STORIES[0]!.unit} ${DEMO_STORIES[0]!.component} change caught before the fixed limit${story?.samplesAhead ? ` (${story.samplesAhead} samples earlier)` : ''}`);
  lines.push(`  ${mark(r.checks.acknowledged)} ${DEMO_STORIES[0]!.unit} ${DEMO_STORIES[0]!.component} incident acknowledged from its e-mail link`);
  lines.push(`  ${mark(r.checks.escalated)} ${DEMO_STORIES[1]!.unit} ${DEMO_STORIES[1]!.component} left unacknowledged and escalated to tier 2`);
  lines.push(`  ${mark(r.checks.usualRateEndsWatch)} ${USUAL_RATE_UNIT.unit} ${USUAL_RATE_UNIT.component}'s standing watch returned to normal after the word that its rate is the usual one`);
  lines.push(`  ${mark(r.checks.webhooksVerified)} every webhook delivery verified with standardwebhooks`);
  lines.push(`  ${mark(r.checks.settled)} pipeline settled (queues and outbox empty) within the wait`);
  lines.push(`  ${mark(r.checks.noFailedJobs)} no job failed${r.failedJobs.map((f) => `; ${f.count} ${f.queue} job${f.count === 1 ? '' : 's'} failed: ${f.reason}`).join('')}`);
  lines.push('', `Done in ${r.seconds.total} s. ${ADVISORY_CAUTION}`);
  return lines;
}

export function demoPassed(r: DemoReport): boolean {
  return Object.values(r.checks).every(Boolean);
}

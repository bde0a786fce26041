/**
 * The live alarm-management key figures as Prometheus gauges: the same computation as the backtest's
 * (incidents/alarmFigures.ts) over the trailing `alarmFigures.liveWindowDays`, with standing, stale and open counted at
 * the moment of computation. The incidents are read with a bound (`maxIncidents`) and the figures computed at most
 * every `refreshSeconds`; scrapes in between get the last figures. After a failed read wearshift_alarm_figures_up is 0,
 * the figure gauges without labels read NaN and those with labels are empty.
 */
import { Gauge, type Registry } from 'prom-client';
import type { AlarmFiguresConfig } from '../domain/alarmFiguresConfig.ts';
import { ADVISORY_CAUTION } from '../domain/caution.ts';
import { RULE_FAMILIES } from '../domain/finding.ts';
import { alarmFigures, componentYearsOf, type AlarmFigures, type FigureIncident, type ResponderMap } from '../incidents/alarmFigures.ts';

const DAY_MS = 86_400_000;

/** What the gauges read: incidents open now or closed since `closedSince`, at most `max`, and the components on record. */
export type IncidentSource = (options: { closedSince: number; max: number }) => Promise<{ incidents: readonly FigureIncident[]; components: number; truncated: boolean }>;

export interface AlarmGaugeOptions {
  readonly source: IncidentSource;
  readonly config: AlarmFiguresConfig;
  readonly responders: ResponderMap;
  /** Default: the system clock. */
  readonly now?: () => number;
}

interface Computed {
  readonly at: number;
  readonly figures: AlarmFigures | null;
  readonly read: number;
  readonly truncated: boolean;
  readonly components: number;
}

export function registerAlarmGauges(registry: Registry, options: AlarmGaugeOptions): void {
  const { config, responders, source } = options;
  const now = options.now ?? Date.now;
  let last: Computed | null = null;
  let running: Promise<Computed> | null = null;

  const compute = async (): Promise<Computed> => {
    const t = now();
    const from = t - config.liveWindowDays * DAY_MS;
    try {
      const read = await source({ closedSince: from - config.chatteringWithinDays * DAY_MS, max: config.maxIncidents });
      const figures = alarmFigures({ incidents: read.incidents, from, to: t, thresholds: config, responders, componentYears: componentYearsOf(read.components, from, t) });
      return { at: t, figures, read: read.incidents.length, truncated: read.truncated, components: read.components };
    } catch {
      return { at: t, figures: null, read: 0, truncated: false, components: 0 };
    }
  };
  /** The figures, recomputed when older than refreshSeconds (or failed); concurrent scrapes share one computation. */
  const current = async (): Promise<Computed> => {
    // A failed read is tried again at the next scrape rather than kept for refreshSeconds.
    if (last !== null && last.figures !== null && now() - last.at < config.refreshSeconds * 1000) return last;
    running ??= compute().finally(() => {
      running = null;
    });
    last = await running;
    return last;
  };

  // Every gauge of the figures says in its HELP that the tool advises: a dashboard that shows them may show the caution.
  const gauge = (name: string, help: string, labelNames: readonly string[], fill: (g: Gauge<string>, c: Computed, f: AlarmFigures) => void) =>
    new Gauge({
      name,
      help: `${help} ${ADVISORY_CAUTION}`,
      labelNames,
      registers: [registry],
      async collect() {
        const c = await current();
        this.reset();
        if (c.figures !== null) fill(this, c, c.figures);
        // Without figures a gauge without labels would read 0, which looks like a fact: NaN says "unknown".
        else if (labelNames.length === 0) this.set(Number.NaN);
      },
    });

  new Gauge({
    name: 'wearshift_alarm_figures_up',
    help: `1 when the last computation of the alarm figures could read the incident store, else 0. ${ADVISORY_CAUTION}`,
    registers: [registry],
    async collect() {
      this.set((await current()).figures === null ? 0 : 1);
    },
  });
  gauge('wearshift_alarm_figures_incidents_read', 'Incidents read for the alarm figures (open ones and those closed within the window).', [], (g, c) => g.set(c.read));
  gauge('wearshift_alarm_figures_truncated', '1 when more incidents qualified than alarmFigures.maxIncidents, so the figures cover part of them.', [], (g, c) => g.set(c.truncated ? 1 : 0));
  gauge('wearshift_alarm_figures_window_days', 'Trailing window of the rate figures, days (alarmFigures.liveWindowDays).', [], (g) => g.set(config.liveWindowDays));
  gauge('wearshift_alarm_annunciations', 'Annunciations (an incident opening or becoming active again, by sampling time) in the window.', [], (g, _c, f) => g.set(f.annunciations));
  gauge('wearshift_alarm_unrouted_annunciations', 'Annunciations in the window that no escalation policy sends to anybody.', [], (g, _c, f) => g.set(f.unrouted));
  gauge('wearshift_alarm_quiet_annunciations', 'Annunciations in the window of incidents only seen in quiet backfill (recorded, nobody told).', [], (g, _c, f) => g.set(f.quiet));
  gauge(
    'wearshift_alarm_responder_annunciations',
    'Annunciations per tier-0 responder of the escalation policies in the window, per day and per week (ISA-18.2 / IEC 62682: alarms per operator), average and peak.',
    ['responder', 'period', 'stat'],
    (g, _c, f) => {
      for (const r of f.responders) {
        g.set({ responder: r.responder, period: 'day', stat: 'average' }, r.perDay.average);
        g.set({ responder: r.responder, period: 'day', stat: 'peak' }, r.perDay.peak);
        g.set({ responder: r.responder, period: 'week', stat: 'average' }, r.perWeek.average);
        g.set({ responder: r.responder, period: 'week', stat: 'peak' }, r.perWeek.peak);
      }
    },
  );
  gauge('wearshift_alarm_incidents_opened', 'Incidents opened in the window, by rule family (an incident counts for every family that raised a finding in it) and in total (family="all").', ['family'], (g, _c, f) => {
    g.set({ family: 'all' }, f.incidents);
    for (const family of RULE_FAMILIES) g.set({ family }, f.byFamily[family].incidents);
  });
  gauge(
    'wearshift_alarm_incidents_per_100_component_years',
    'Incidents opened in the window per 100 component-years, counting every component on record as watched for the whole window; by rule family and in total (family="all").',
    ['family'],
    (g, _c, f) => {
      if (f.per100ComponentYears !== null) g.set({ family: 'all' }, f.per100ComponentYears);
      for (const family of RULE_FAMILIES) {
        const v = f.byFamily[family].per100ComponentYears;
        if (v !== null) g.set({ family }, v);
      }
    },
  );
  gauge('wearshift_alarm_incidents_open', 'Incidents not closed.', [], (g, _c, f) => g.set(f.openAtEnd));
  gauge('wearshift_alarm_incidents_standing', 'Incidents in the active alarm state for longer than alarmFigures.standingAfterDays (EEMUA 191 standing alarms).', [], (g, _c, f) => g.set(f.standing.atEnd));
  gauge('wearshift_alarm_incidents_stale', 'Open incidents unacknowledged and not shelved for longer than alarmFigures.staleAfterDays (ISA-18.2 stale alarms).', [], (g, _c, f) => g.set(f.stale.atEnd));
  gauge('wearshift_alarm_incidents_chattering', 'Incidents active again within alarmFigures.chatteringWithinDays of their return to normal, in the window (ISA-18.2 chattering).', [], (g, _c, f) => g.set(f.chattering.incidents));
  gauge('wearshift_alarm_bad_actor_annunciations', 'Annunciations in the window of the components with the most (the top alarmFigures.topBadActors).', ['unit', 'component'], (g, _c, f) => {
    for (const c of f.badActors.components) g.set({ unit: c.unit, component: c.component }, c.annunciations);
  });
  gauge('wearshift_alarm_bad_actor_pair_incidents', 'Incidents in the window per rule/measurand pair, for the pairs with the most (the top alarmFigures.topBadActors); measurand "sample" for a sampling check that judges the whole sample.', ['rule', 'measurand'], (g, _c, f) => {
    for (const p of f.badActors.pairs) g.set({ rule: p.rule, measurand: p.measurand }, p.incidents);
  });
}

/** What every benchmark part hands back, and how the runner shows it: a table on screen, one JSON line per part. */

export interface Table {
  readonly columns: readonly string[];
  readonly rows: readonly (readonly string[])[];
}

export interface PartResult {
  readonly name: string;
  /** The figures, as printed with --json (`bench` is added by the runner). */
  readonly json: Record<string, unknown>;
  readonly table: Table;
  /** Lines printed under the table: sizes, definitions, targets met or missed. */
  readonly notes: readonly string[];
}

export function skipped(name: string, reason: string): PartResult {
  return { name, json: { skipped: reason }, table: { columns: ['part', 'result'], rows: [[name, `skipped: ${reason}`]] }, notes: [] };
}

export function renderTable(t: Table): string {
  const widths = t.columns.map((c, i) => Math.max(c.length, ...t.rows.map((r) => (r[i] ?? '').length)));
  const line = (cells: readonly string[]) => cells.map((c, i) => (i === 0 ? c.padEnd(widths[i]!) : c.padStart(widths[i]!))).join('  ');
  return [line(t.columns), widths.map((w) => '-'.repeat(w)).join('  '), ...t.rows.map(line)].join('\n');
}

export function renderPart(p: PartResult): string {
  return [`== ${p.name}`, renderTable(p.table), ...p.notes.map((n) => `  ${n}`), ''].join('\n');
}

export function jsonLine(p: PartResult): string {
  return JSON.stringify({ bench: p.name, ...p.json });
}

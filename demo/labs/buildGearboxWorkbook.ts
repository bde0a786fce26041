/**
 * Writes demo/labs/gearbox-lab.xlsx: an invented gearbox laboratory's export in the long layout (one row per
 * test), with dates typed as dates, units in their own column and a second sheet of notes the mapping skips.
 * Run: node --import tsx demo/labs/buildGearboxWorkbook.ts [OUT]
 */
import ExcelJS from 'exceljs';

interface Test {
  readonly test: string;
  readonly units: string;
  readonly value: (i: number, unit: number) => number | string;
}

const TESTS: readonly Test[] = [
  { test: 'Iron', units: 'mg/kg', value: (i, u) => round(18 + 3.1 * i + u * 2) },
  { test: 'Copper', units: 'mg/kg', value: (i, u) => round(4 + 0.6 * i + u) },
  { test: 'Silicon', units: 'ppm', value: (i) => (i % 3 === 0 ? '<1' : round(1 + (i % 4) * 0.5)) },
  { test: 'Water (KF)', units: '%', value: (i) => round(0.01 + (i % 3) * 0.005, 4) },
  { test: 'Viscosity @ 40 °C', units: 'cSt', value: (i) => round(219 - 0.8 * i, 1) },
  { test: 'ISO code', units: '', value: (i) => `${18 + (i % 2)}/16/13` },
];

function round(x: number, digits = 1): number {
  return Number(x.toFixed(digits));
}

export async function buildGearboxWorkbook(out: string): Promise<void> {
  const workbook = new ExcelJS.stream.xlsx.WorkbookWriter({ filename: out, useSharedStrings: true, useStyles: true });
  const sheet = workbook.addWorksheet('Results');
  sheet.addRow(['Gearbox laboratory export (invented demo data)']).commit();
  sheet.addRow([]).commit();
  sheet.addRow(['Lab ref', 'Asset', 'Compartment', 'Drawn', 'Test', 'Result', 'Units', 'Hrs on oil', 'Op hrs', 'Oil changed']).commit();
  let ref = 77_000;
  ['PS1-P1', 'PS1-P2'].forEach((asset, u) => {
    let opHours = 9000 + 400 * u;
    for (let i = 0; i < 8; i += 1) {
      ref += 1;
      opHours += 250;
      const drawn = new Date(Date.UTC(2026, i, 10 + u, 9, 30));
      for (const t of TESTS) {
        const row = sheet.addRow([`GB-${ref}`, asset, 'gearbox', drawn, t.test, t.value(i, u), t.units, 250 * (i + 1), opHours, i === 0 ? 'yes' : 'no']);
        row.getCell(4).numFmt = 'mm/dd/yyyy hh:mm';
        row.commit();
      }
    }
  });
  sheet.commit();
  const notes = workbook.addWorksheet('Notes');
  notes.addRow(['Results refer to the sample as received.']).commit();
  notes.commit();
  await workbook.commit();
}

if (import.meta.url === `file://${process.argv[1]}`) {
  await buildGearboxWorkbook(process.argv[2] ?? new URL('./gearbox-lab.xlsx', import.meta.url).pathname);
}

/** Three significant figures (whole numbers from 1000), with a true minus sign as the axis labels have. */
export function fmt(v: number): string {
  const text = Math.abs(v) >= 1000 ? String(Math.round(v)) : String(Number(v.toPrecision(3)));
  return text.replace('-', '−');
}

/** Width of a line of DejaVu Sans, whose average glyph is about 0.62 em wide. */
export function textWidth(content: string, size: number): number {
  return content.length * size * 0.62;
}

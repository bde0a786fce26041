/**
 * `wearshift demo --keep-open` hands over what is needed to try the board: its address, a viewer token to look and a
 * responder token to acknowledge, shelve and resolve (a viewer token alone cannot acknowledge).
 */
import { describe, expect, it } from 'vitest';
import { formatKeepOpen } from '../../src/demo/report.ts';

describe('the demo left open', () => {
  const lines = formatKeepOpen({ apiUrl: 'http://127.0.0.1:41234', board: true, viewerToken: 'view-Tok3n', responderToken: 'resp-Tok3n' });

  it('prints a responder token beside the viewer token, each on its own line', () => {
    expect(lines).toContain('Viewer token:    view-Tok3n');
    expect(lines).toContain('Responder token: resp-Tok3n');
  });

  it('says where the board is and which token does what', () => {
    const board = lines.find((l) => l.startsWith('Board: '));
    expect(board).toContain('http://127.0.0.1:41234/');
    expect(board).toMatch(/viewer token to look, the responder token to acknowledge/);
    expect(formatKeepOpen({ apiUrl: 'http://x', board: false, viewerToken: 'v', responderToken: 'r' })).toContain('Responder token: r');
  });
});

/**
 * Text from lab feeds and from people (unit names, notes, reasons) printed to a terminal: an escape sequence in it
 * could clear the screen, set the window title or overwrite a line. Every control character but the line break and
 * the tab, every C1 control and every bidirectional override is shown as a visible escape (`\x1B`, `\u202E`), so
 * what is printed is what was stored, and nothing acts on the terminal.
 */

// C0 controls without \t and \n, DEL, C1 controls, line/paragraph separators, bidirectional embeddings and isolates.
// eslint-disable-next-line no-control-regex
const ACTS_ON_A_TERMINAL = /[\u0000-\u0008\u000b-\u001f\u007f-\u009f\u2028\u2029\u202a-\u202e\u2066-\u2069]/g;

export function terminalText(text: string): string {
  return text.replace(ACTS_ON_A_TERMINAL, (c) => {
    const code = c.charCodeAt(0);
    return code <= 0xff ? `\\x${code.toString(16).toUpperCase().padStart(2, '0')}` : `\\u${code.toString(16).toUpperCase().padStart(4, '0')}`;
  });
}

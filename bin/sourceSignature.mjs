// What the compiled dist/ was built from: the number, total size and newest modification time of the files under
// src/. bin/wearshift.js runs dist/ only while src/ still has the signature written at build time; after an edit it
// runs the sources through tsx instead, so a stale build is never used.
import { readdirSync, statSync } from 'node:fs';
import { join } from 'node:path';

export function sourceSignature(srcDir) {
  let count = 0;
  let bytes = 0;
  let newest = 0;
  for (const name of readdirSync(srcDir, { recursive: true })) {
    const s = statSync(join(srcDir, name));
    if (!s.isFile()) continue;
    count += 1;
    bytes += s.size;
    newest = Math.max(newest, s.mtimeMs);
  }
  return `${count} files, ${bytes} bytes, newest ${newest}`;
}

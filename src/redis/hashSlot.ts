/**
 * The Redis Cluster hash slot of a key: CRC16 (XMODEM: polynomial 0x1021, initial value 0) of the key's hash tag,
 * the part between the first `{` and the next `}` when that part is not empty, else of the whole key, modulo 16384
 * (Redis Cluster specification, "Keys distribution model"; its check value: CRC16 of "123456789" is 0x31C3).
 */
export const HASH_SLOTS = 16384;

const TABLE = (() => {
  const t = new Uint16Array(256);
  for (let i = 0; i < 256; i++) {
    let c = i << 8;
    for (let b = 0; b < 8; b++) c = c & 0x8000 ? ((c << 1) ^ 0x1021) & 0xffff : (c << 1) & 0xffff;
    t[i] = c;
  }
  return t;
})();

/** CRC16 of `bytes`, continuing from `crc` (the CRC16 of what came before them; 0 for none). */
export function crc16(bytes: Uint8Array, crc = 0): number {
  for (const byte of bytes) crc = crc16Byte(crc, byte);
  return crc;
}

/** One more byte. */
export function crc16Byte(crc: number, byte: number): number {
  return ((crc << 8) & 0xffff) ^ TABLE[((crc >> 8) ^ byte) & 0xff]!;
}

export function hashSlot(key: string): number {
  const open = key.indexOf('{');
  if (open !== -1) {
    const close = key.indexOf('}', open + 1);
    if (close > open + 1) key = key.slice(open + 1, close);
  }
  return crc16(Buffer.from(key, 'utf8')) % HASH_SLOTS;
}

/**
 * EBCDIC (IBM code page 037, the code page SEG-Y textual headers conventionally use) to and
 * from text. Code page 037 is a permutation of ISO 8859-1, so one 256-entry table maps each
 * EBCDIC byte to its Latin-1 character code.
 */

// Index = EBCDIC byte, value = Latin-1 code (IBM code page 037 chart).
const TABLE_HEX =
  "000102039c09867f978d8e0b0c0d0e0f101112139d8508871819928f1c1d1e1f" +
  "80818283840a171b88898a8b8c050607909116939495960498999a9b14159e1a" +
  "20a0e2e4e0e1e3e5e7f1a22e3c282b7c26e9eaebe8edeeefecdf21242a293bac" +
  "2d2fc2c4c0c1c3c5c7d1a62c255f3e3ff8c9cacbc8cdcecfcc603a2340273d22" +
  "d8616263646566676869abbbf0fdfeb1b06a6b6c6d6e6f707172aabae6b8c6a4" +
  "b57e737475767778797aa1bfd0dddeae5ea3a5b7a9a7b6bcbdbe5b5dafa8b4d7" +
  "7b414243444546474849adf4f6f2f3f57d4a4b4c4d4e4f505152b9fbfcf9faff" +
  "5cf7535455565758595ab2d4d6d2d3d530313233343536373839b3dbdcd9da9f";

const EBCDIC_TO_LATIN1 = new Uint8Array(256);
const LATIN1_TO_EBCDIC = new Uint8Array(256);
for (let i = 0; i < 256; i++) {
  const code = parseInt(TABLE_HEX.slice(2 * i, 2 * i + 2), 16);
  EBCDIC_TO_LATIN1[i] = code;
  LATIN1_TO_EBCDIC[code] = i;
}

/** Decodes EBCDIC (code page 037) bytes to a string. */
export function decodeEbcdic(bytes: Uint8Array): string {
  let s = "";
  for (let i = 0; i < bytes.length; i++) s += String.fromCharCode(EBCDIC_TO_LATIN1[bytes[i]]);
  return s;
}

/** Encodes text as EBCDIC (code page 037); characters outside Latin-1 become "?". */
export function encodeEbcdic(text: string): Uint8Array {
  const out = new Uint8Array(text.length);
  for (let i = 0; i < text.length; i++) {
    const c = text.charCodeAt(i);
    out[i] = LATIN1_TO_EBCDIC[c < 256 ? c : 0x3f];
  }
  return out;
}

/**
 * Guesses whether a textual header is EBCDIC or ASCII by counting bytes that are letters, digits
 * or spaces in each code: EBCDIC letters lie at 0x81–0xE9 and digits at 0xF0–0xF9 with space 0x40;
 * in ASCII letters and digits lie below 0x80 with space 0x20 (common practice for SEG-Y readers).
 */
export function looksLikeEbcdic(bytes: Uint8Array): boolean {
  let ascii = 0;
  let ebcdic = 0;
  for (let i = 0; i < bytes.length; i++) {
    const b = bytes[i];
    if (b === 0x20 || (b >= 0x30 && b <= 0x39) || (b >= 0x41 && b <= 0x5a) || (b >= 0x61 && b <= 0x7a)) ascii++;
    if (
      b === 0x40 ||
      (b >= 0xf0 && b <= 0xf9) ||
      (b >= 0xc1 && b <= 0xc9) ||
      (b >= 0xd1 && b <= 0xd9) ||
      (b >= 0xe2 && b <= 0xe9) ||
      (b >= 0x81 && b <= 0x89) ||
      (b >= 0x91 && b <= 0x99) ||
      (b >= 0xa2 && b <= 0xa9)
    )
      ebcdic++;
  }
  return ebcdic > ascii;
}

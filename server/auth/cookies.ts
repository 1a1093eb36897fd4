/** Reading one cookie from a Cookie header (RFC 6265 §4.2; our values are base64url, no decoding). */
export function readCookie(header: string | undefined, name: string): string | undefined {
  if (!header) return undefined;
  for (const part of header.split(';')) {
    const i = part.indexOf('=');
    if (i < 0) continue;
    if (part.slice(0, i).trim() === name) {
      let v = part.slice(i + 1).trim();
      if (v.startsWith('"') && v.endsWith('"') && v.length >= 2) v = v.slice(1, -1);
      return v;
    }
  }
  return undefined;
}

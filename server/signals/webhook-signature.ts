/**
 * Webhook signatures: HMAC-SHA256 (RFC 2104, FIPS 198-1; SHA-256 per FIPS 180-4) over
 * `<timestamp>.<raw body>`, sent as `Tideline-Signature: t=<ms epoch>,v1=<hex>`. Signing the
 * timestamp with the body lets a receiver refuse replays older than its tolerance.
 */
import { createHmac, timingSafeEqual } from 'node:crypto';

export const SIGNATURE_HEADER = 'tideline-signature';
export const EVENT_ID_HEADER = 'tideline-event-id';
/** The event id again, under the name of the IETF draft "The Idempotency-Key HTTP Header Field". */
export const IDEMPOTENCY_HEADER = 'idempotency-key';

export function hmacSha256Hex(secret: string | Buffer, message: string | Buffer): string {
  return createHmac('sha256', secret).update(message).digest('hex');
}

export function signatureHeader(secret: string, body: string, t: number): string {
  return `t=${t},v1=${hmacSha256Hex(secret, `${t}.${body}`)}`;
}

/** Check a received signature; returns null when valid, else what is wrong. */
export function verifySignature(secret: string, header: string | undefined, body: string, now: number, toleranceMs = 5 * 60_000): string | null {
  if (!header) return 'no signature header';
  const parts = Object.fromEntries(
    header.split(',').map((p) => {
      const i = p.indexOf('=');
      return [p.slice(0, i).trim(), p.slice(i + 1).trim()];
    }),
  );
  const t = Number(parts.t);
  if (!Number.isFinite(t)) return 'signature header has no timestamp t=';
  if (!parts.v1 || !/^[0-9a-f]{64}$/.test(parts.v1)) return 'signature header has no v1= HMAC-SHA256 hex';
  if (Math.abs(now - t) > toleranceMs) return `signature timestamp is ${Math.round((now - t) / 1000)} s away from now`;
  const expected = Buffer.from(hmacSha256Hex(secret, `${t}.${body}`), 'hex');
  return timingSafeEqual(expected, Buffer.from(parts.v1, 'hex')) ? null : 'signature does not match';
}

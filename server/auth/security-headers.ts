/**
 * Response headers that close common browser-side holes (OWASP Secure Headers Project):
 * no MIME sniffing, no framing by other sites (clickjacking of the signature dialog), no referrer
 * leaking ids, and HSTS when served over TLS. Content-Security-Policy beyond frame-ancestors is
 * left to the dashboard, which knows what it loads.
 */
import type { RequestHandler } from 'express';

export function securityHeaders(tls: boolean): RequestHandler {
  return (_req, res, next) => {
    res.setHeader('X-Content-Type-Options', 'nosniff');
    res.setHeader('X-Frame-Options', 'DENY');
    res.setHeader('Content-Security-Policy', "frame-ancestors 'none'");
    res.setHeader('Referrer-Policy', 'no-referrer');
    if (tls) res.setHeader('Strict-Transport-Security', 'max-age=31536000');
    next();
  };
}

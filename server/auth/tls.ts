/**
 * TLS: when a certificate and key are configured the server listens with https, and the
 * WebSocket endpoints (/ingest, /live) attached to it are wss. TLS 1.2 is the lowest version
 * accepted (NIST SP 800-52 Rev. 2 asks for 1.2 or later).
 */
import { readFileSync } from 'node:fs';
import http from 'node:http';
import https from 'node:https';
import { StartupError } from '../startup-error.ts';
import type { TlsConfig } from './security-config.ts';

function readPem(path: string, what: string): Buffer {
  let b: Buffer;
  try {
    b = readFileSync(path);
  } catch (e) {
    throw new StartupError(`tls.${what}: cannot read the file ${path} (${(e as Error).message})`);
  }
  if (!b.toString('latin1').includes('-----BEGIN ')) throw new StartupError(`tls.${what}: the file ${path} is not a PEM file (no -----BEGIN line)`);
  return b;
}

export function loadTlsOptions(cfg: TlsConfig): https.ServerOptions {
  return {
    cert: readPem(cfg.cert, 'cert'),
    key: readPem(cfg.key, 'key'),
    ...(cfg.ca ? { ca: readPem(cfg.ca, 'ca') } : {}),
    ...(cfg.passphrase ? { passphrase: cfg.passphrase } : {}),
    minVersion: 'TLSv1.2',
  };
}

/** An https server when `tls` is given (files read now; a bad cert/key throws naming the file), else http. */
export function createWebServer(handler: http.RequestListener, tls: TlsConfig | null, serverOptions: http.ServerOptions & { handshakeTimeout?: number } = {}): http.Server | https.Server {
  if (!tls) return http.createServer(serverOptions, handler);
  const opts = loadTlsOptions(tls);
  try {
    return https.createServer({ ...serverOptions, ...opts }, handler);
  } catch (e) {
    throw new StartupError(`tls.cert ${tls.cert} and tls.key ${tls.key}: the certificate or key is not usable (${(e as Error).message})${tls.passphrase ? '' : '; an encrypted key needs tls.passphrase'}`);
  }
}

/** 'https'/'wss' or 'http'/'ws' for printing addresses. */
export function schemes(tls: TlsConfig | null): { http: 'http' | 'https'; ws: 'ws' | 'wss' } {
  return tls ? { http: 'https', ws: 'wss' } : { http: 'http', ws: 'ws' };
}

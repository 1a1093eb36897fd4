/**
 * Limits on HTTP connections, so that a client that opens a connection and sends nothing, or
 * trickles its request headers a byte at a time, cannot hold sockets (and file descriptors) for
 * long. Node's own defaults leave an idle new connection open for ever and a trickled header block
 * for up to 90 s (headersTimeout 60 s, checked every 30 s).
 *
 * - headers: the whole request head must arrive within `headersTimeoutMs` (checked every second);
 *   over TLS the handshake too;
 * - idle: a connection with no request in flight and no byte moving for `idleTimeoutMs` is closed.
 *   A request being answered is never cut (a report or a model build may take a while), and a
 *   socket upgraded to a WebSocket (/ingest, /live) is out of reach of both (ws clears the socket
 *   timeout; those protocols have their own heartbeats).
 * - keep-alive: the same idle limit is the keep-alive time the server advertises. With Node's 5 s a
 *   client that reuses a pooled socket just as the server closes it gets ECONNRESET; fetch (undici)
 *   drops its sockets only a margin before the advertised time, and a busy event loop can eat that
 *   margin. A longer advertised time makes the race as rare as 30 s idle pauses are.
 */
import type { Server as HttpServer, ServerOptions } from 'node:http';
import type { Socket } from 'node:net';

export interface HttpLimits {
  headersTimeoutMs: number;
  idleTimeoutMs: number;
}

/** Options for http(s).createServer. */
export function serverOptions(l: HttpLimits): ServerOptions & { handshakeTimeout: number } {
  return { headersTimeout: l.headersTimeoutMs, connectionsCheckingInterval: 1000, handshakeTimeout: l.headersTimeoutMs, keepAliveTimeout: l.idleTimeoutMs };
}

/** Close connections idle for idleTimeoutMs, except while a request on them is being answered. */
export function applyIdleLimit(server: HttpServer, l: HttpLimits): void {
  const busy = new WeakMap<Socket, number>();
  server.on('request', (req, res) => {
    const s = req.socket;
    busy.set(s, (busy.get(s) ?? 0) + 1);
    res.once('close', () => busy.set(s, Math.max(0, (busy.get(s) ?? 1) - 1)));
  });
  server.timeout = l.idleTimeoutMs;
  // With a 'timeout' listener Node leaves the socket to us: close it only when nothing is in flight.
  server.on('timeout', (socket: Socket) => {
    if ((busy.get(socket) ?? 0) === 0) socket.destroy();
  });
}

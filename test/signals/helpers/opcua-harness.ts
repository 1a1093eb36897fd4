/**
 * The full Tideline server with its OPC UA server on a free port (security None, anonymous, for
 * tests), an injected clock the test can advance, optionally a small real model deployed to a unit,
 * and a node-opcua client watching condition events: what the OPC UA integration tests share.
 */
import type { DataValue, StatusCode } from 'node-opcua';
import { login, startTestServer, type TestServer } from '../../server/helpers.ts';
import { buildSmallDryerModel, installModel } from '../../server/model-fixture.ts';
import { connectClient, type TestClient } from './opcua-client.ts';

/** Poll `cond` every 25 ms until true; fail naming `what` after `ms`. */
export async function until(cond: () => boolean | Promise<boolean>, what: string, ms = 30_000): Promise<void> {
  const end = Date.now() + ms;
  while (!(await cond())) {
    if (Date.now() > end) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 25));
  }
}

export interface OpcuaHarness {
  ts: TestServer;
  client: TestClient;
  /** Condition events as the client received them (the watched fields by name). */
  events: Record<string, unknown>[];
  /** Move the server's clock ahead of the wall clock. */
  advance(ms: number): void;
  /** Browse path of a variable in the unit's folder. */
  path(unit: string, name: string): string;
  /** Poll until the variable has this value and status code; returns the last read. */
  reaches(unit: string, name: string, value: unknown, code: StatusCode): Promise<DataValue>;
  stop(): Promise<void>;
}

export async function startOpcuaHarness(opts: { ingest: Record<string, unknown>; eventFields: string[]; modelOn?: string }): Promise<OpcuaHarness> {
  let offset = 0;
  const ts = await startTestServer(
    { ingest: opts.ingest, signals: { pollMs: 20, opcua: { port: 0, securityModes: ['None'], allowAnonymous: true, heartbeatMs: 200 } } } as never,
    { now: () => Date.now() + offset },
  );
  if (opts.modelOn) {
    const { model, text } = buildSmallDryerModel(11);
    await installModel(ts.server.ctx.storage, text, model, opts.modelOn);
    await ts.server.ctx.ingest.refreshDeployment(opts.modelOn);
  }
  const admin = await login(ts, 'administrator');
  const client = await connectClient((await admin.get('/api/signals')).body.opcua.endpointUrl);
  const events: Record<string, unknown>[] = [];
  await client.watchEvents(opts.eventFields, (e) => events.push(e));
  const path = (unit: string, name: string) => `/Objects/1:Tideline/1:${unit}/1:${name}`;
  return {
    ts,
    client,
    events,
    advance: (ms) => void (offset += ms),
    path,
    async reaches(unit, name, value, code) {
      let dv: DataValue | null = null;
      await until(async () => {
        dv = await client.read(path(unit, name));
        return dv.value.value === value && dv.statusCode.equals(code);
      }, `${name} = ${String(value)} with ${code.name}`).catch((e: Error) => {
        throw new Error(`${e.message}; last read ${String(dv?.value.value)} with ${dv?.statusCode.name}`);
      });
      return dv!;
    },
    async stop() {
      await client.close();
      await ts.stop();
    },
  };
}

/** A node-opcua client for the signal tests: connect, read by browse path, watch values and events. */
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import {
  AttributeIds,
  ClientMonitoredItem,
  ClientSubscription,
  DataType,
  MessageSecurityMode,
  OPCUACertificateManager,
  OPCUAClient,
  SecurityPolicy,
  TimestampsToReturn,
  constructEventFilter,
  makeBrowsePath,
  type ClientSession,
  type DataValue,
  type NodeId,
  type Variant,
} from 'node-opcua';

export interface TestClient {
  session: ClientSession;
  nodeId(path: string): Promise<NodeId>;
  read(path: string): Promise<DataValue>;
  write(path: string, dataType: DataType, value: unknown): Promise<string>;
  watch(path: string, onChange: (dv: DataValue) => void): Promise<void>;
  watchEvents(fields: string[], onEvent: (values: Record<string, unknown>) => void): Promise<void>;
  close(): Promise<void>;
}

// One client PKI (and its RSA key, slow to make) per test process; every server has its own PKI,
// so this certificate is still unknown to each new server.
let clientPki: Promise<OPCUACertificateManager> | null = null;
function clientCertificates(): Promise<OPCUACertificateManager> {
  clientPki ??= (async () => {
    const m = new OPCUACertificateManager({ rootFolder: join(mkdtempSync(join(tmpdir(), 'tideline-opcua-client-')), 'pki'), automaticallyAcceptUnknownCertificate: true });
    await m.initialize();
    return m;
  })();
  return clientPki;
}

export async function connectClient(url: string, security: { mode: 'None' | 'Sign' | 'SignAndEncrypt'; policy?: SecurityPolicy } = { mode: 'None' }): Promise<TestClient> {
  const clientCertificateManager = await clientCertificates();
  const client = OPCUAClient.create({
    applicationName: 'tideline-test-dcs',
    applicationUri: 'urn:tideline-test-dcs',
    clientCertificateManager,
    securityMode: MessageSecurityMode[security.mode],
    securityPolicy: security.mode === 'None' ? SecurityPolicy.None : (security.policy ?? SecurityPolicy.Basic256Sha256),
    endpointMustExist: false,
    connectionStrategy: { maxRetry: 3, initialDelay: 100, maxDelay: 500 },
  });
  await client.connect(url);
  const session = await client.createSession();
  const subscription = ClientSubscription.create(session, {
    requestedPublishingInterval: 50,
    requestedLifetimeCount: 1000,
    requestedMaxKeepAliveCount: 20,
    maxNotificationsPerPublish: 1000,
    publishingEnabled: true,
    priority: 1,
  });
  const cache = new Map<string, NodeId>();
  const nodeId = async (path: string): Promise<NodeId> => {
    const hit = cache.get(path);
    if (hit) return hit;
    const res = await session.translateBrowsePath(makeBrowsePath('RootFolder', path));
    const id = res.targets?.[0]?.targetId;
    if (!id) throw new Error(`no node at ${path}: ${res.statusCode.toString()}`);
    cache.set(path, id);
    return id;
  };
  return {
    session,
    nodeId,
    read: async (path) => session.read({ nodeId: await nodeId(path), attributeId: AttributeIds.Value }),
    write: async (path, dataType, value) =>
      (await session.write({ nodeId: await nodeId(path), attributeId: AttributeIds.Value, value: { value: { dataType, value } } })).toString(),
    watch: async (path, onChange) => {
      const item = ClientMonitoredItem.create(subscription, { nodeId: await nodeId(path), attributeId: AttributeIds.Value }, { samplingInterval: 0, discardOldest: false, queueSize: 100 }, TimestampsToReturn.Both);
      item.on('changed', onChange);
      await new Promise<void>((resolve) => item.once('initialized', () => resolve()));
    },
    watchEvents: async (fields, onEvent) => {
      const item = ClientMonitoredItem.create(
        subscription,
        { nodeId: 'ns=0;i=2253', attributeId: AttributeIds.EventNotifier },
        { samplingInterval: 0, discardOldest: false, queueSize: 1000, filter: constructEventFilter(fields) },
        TimestampsToReturn.Neither,
      );
      item.on('changed', (values: unknown) => {
        const arr = values as Variant[];
        onEvent(Object.fromEntries(fields.map((f, i) => [f, arr[i]?.value])));
      });
      await new Promise<void>((resolve) => item.once('initialized', () => resolve()));
    },
    close: async () => {
      await subscription.terminate().catch(() => undefined);
      await session.close().catch(() => undefined);
      await client.disconnect();
    },
  };
}

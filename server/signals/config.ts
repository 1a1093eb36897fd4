/**
 * Settings of the signal channels, under `signals` in Tideline's configuration (docs/signals.md).
 * Every channel is off unless configured. Tideline advises; the site's validated control strategy,
 * interlocks and procedures decide what a signal may do.
 */
import { z } from 'zod';

const backoffSchema = z
  .object({
    baseMs: z.number().int().min(1).default(1000),
    capMs: z.number().int().min(1).default(5 * 60_000),
  })
  .prefault({});

export const webhookSchema = z.object({
  name: z.string().regex(/^[A-Za-z0-9._-]{1,64}$/, 'use letters, digits and . _ - only'),
  url: z.string().regex(/^https?:\/\/\S+$/, 'must be an http:// or https:// URL'),
  /** Shared secret for the HMAC-SHA256 signature; at least 16 characters. */
  secret: z.string().min(16),
  /** Only these event types (default: all). */
  types: z.array(z.string().min(1)).optional(),
  /** Attempts before an event is dead-lettered. */
  maxAttempts: z.number().int().min(1).max(1000).default(12),
  backoff: backoffSchema,
  timeoutMs: z.number().int().min(100).max(120_000).default(10_000),
});

export const mqttSchema = z.object({
  url: z.string().regex(/^(mqtts?|wss?|tcp):\/\/\S+$/, 'must be an mqtt://, mqtts://, ws:// or wss:// URL'),
  prefix: z.string().min(1).max(64).regex(/^[^#+/][^#+]*[^#+/]$|^[^#+/]$/, 'no # or +, no leading or trailing /').default('tideline'),
  clientId: z.string().min(1).max(64).default('tideline'),
  username: z.string().optional(),
  password: z.string().optional(),
  publishTimeoutMs: z.number().int().min(100).default(10_000),
  stateEveryMs: z.number().int().min(0).default(1000),
  keepaliveS: z.number().int().min(1).max(3600).default(30),
});

export const SECURITY_MODES = ['None', 'Sign', 'SignAndEncrypt'] as const;

export const opcuaSchema = z.object({
  /** 0 = a free port (tests); 4840 is the IANA port for OPC UA. */
  port: z.number().int().min(0).max(65535).default(4840),
  hostname: z.string().optional(),
  /** Security modes offered; None only for a lab. */
  securityModes: z.array(z.enum(SECURITY_MODES)).min(1).default(['SignAndEncrypt']),
  /** Policies offered with Sign / SignAndEncrypt (node-opcua SecurityPolicy names). */
  securityPolicies: z.array(z.enum(['Basic256Sha256', 'Aes128_Sha256_RsaOaep', 'Aes256_Sha256_RsaPss'])).min(1).default(['Basic256Sha256', 'Aes128_Sha256_RsaOaep', 'Aes256_Sha256_RsaPss']),
  allowAnonymous: z.boolean().default(false),
  /** Trust client certificates not yet in pki/trusted (lab only). */
  acceptUnknownCertificates: z.boolean().default(false),
  /** PKI folder; default <dataDir>/pki/opcua. */
  pkiDir: z.string().optional(),
  heartbeatMs: z.number().int().min(100).max(60_000).default(1000),
  /** Longest shelve an OPC UA client may ask for, ms (MaxTimeShelved). */
  maxTimeShelvedMs: z.number().int().min(1000).default(8 * 3600_000),
  /** Engineering range of the predicted property per unit (default 0…100). */
  propertyRange: z.record(z.string(), z.object({ low: z.number(), high: z.number() })).default({}),
});

export const signalsConfigSchema = z
  .object({
    webhooks: z.array(webhookSchema).default([]),
    mqtt: mqttSchema.nullable().default(null),
    opcua: opcuaSchema.nullable().default(null),
    /**
     * A channel configured for the first time on a server with history: false (default) sends only
     * events written from then on; true sends the whole outbox history first.
     */
    replayHistory: z.boolean().default(false),
    /** Idle poll interval of the delivery loops, ms. */
    pollMs: z.number().int().min(10).max(60_000).default(500),
    /**
     * How often the audit trail's head (SEQ:HASH) goes to the log and every channel, ms; 0 = never.
     * Hourly: common practice for such checkpoints, no published source.
     */
    auditAnchorEveryMs: z.number().int().min(0).max(7 * 24 * 3600_000).default(3_600_000),
  })
  .strict();

export type SignalsConfig = z.infer<typeof signalsConfigSchema>;
export type WebhookSettings = z.infer<typeof webhookSchema>;
export type MqttSettings = z.infer<typeof mqttSchema>;
export type OpcuaSettings = z.infer<typeof opcuaSchema>;

export function parseSignalsConfig(raw: unknown): SignalsConfig {
  const r = signalsConfigSchema.safeParse(raw ?? {});
  if (!r.success) {
    throw new Error(r.error.issues.map((i) => `${['signals', ...i.path].join('.')}: ${i.message}`).join('\n'));
  }
  const names = new Set<string>();
  for (const w of r.data.webhooks) {
    if (names.has(w.name)) throw new Error(`signals.webhooks: name '${w.name}' is used twice`);
    names.add(w.name);
  }
  return r.data;
}

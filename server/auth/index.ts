/**
 * Access control. `install(ctx)` sets ctx.auth and ctx.audit and mounts /api/auth/*
 * and the audit routes /api/audit/* (installing server/audit as well; calling its install again
 * is harmless). See docs/security.md.
 */
import { install as installAudit } from '../audit/index.ts';
import { authRouter, authRoutes } from './auth-routes.ts';
import { readSecurityConfig } from './security-config.ts';
import { securityHeaders } from './security-headers.ts';
import { ensureSecurity, type SecurityHost } from './security-setup.ts';

const installed = new WeakSet<object>();

export function install(ctx: SecurityHost): void {
  const { auth } = ensureSecurity(ctx);
  if (!installed.has(ctx)) {
    installed.add(ctx);
    ctx.app?.use(securityHeaders(readSecurityConfig(ctx.config).tls !== null));
    const table = authRoutes(auth);
    ctx.api.use('/auth', authRouter(auth, table));
    ctx.routes?.include('/auth', table);
  }
  installAudit(ctx);
}

export { AuthService } from './auth-service.ts';
export { ensureSecurity, createSecurity, type SecurityHost } from './security-setup.ts';
export { authConfigSchema, tlsConfigSchema, readSecurityConfig, type AuthConfig, type TlsConfig } from './security-config.ts';
export { createWebServer, loadTlsOptions, schemes } from './tls.ts';
export { ensureDemoAdministrator } from './demo-admin.ts';
export { runSecurityCli, SECURITY_COMMANDS } from './cli.ts';
export * from './types.ts';

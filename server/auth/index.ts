/**
 * Access control (issue 8). `install(ctx)` sets ctx.auth (and ctx.audit if not yet set) and
 * mounts /api/auth/*. See docs/security.md.
 */
import { authRouter } from './auth-routes.ts';
import { ensureSecurity, type SecurityHost } from './security-setup.ts';

export function install(ctx: SecurityHost): void {
  const { auth } = ensureSecurity(ctx);
  ctx.api.use('/auth', authRouter(auth));
}

export { AuthService } from './auth-service.ts';
export { ensureSecurity, createSecurity, type SecurityHost } from './security-setup.ts';
export { authConfigSchema, tlsConfigSchema, readSecurityConfig, type AuthConfig, type TlsConfig } from './security-config.ts';
export { createWebServer, loadTlsOptions, schemes } from './tls.ts';
export { ensureDemoAdministrator } from './demo-admin.ts';
export { runSecurityCli, SECURITY_COMMANDS } from './cli.ts';
export * from './types.ts';

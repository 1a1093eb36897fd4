/**
 * Installs the model-life part (docs/model-life.md): shadow-run and health routes, and the health of
 * each unit's deployed version refreshed after every batch end, at start and every ten minutes (a
 * review due date passes without a batch).
 */
import type { ServerContext } from '../context.ts';
import { addModelLifeRoutes } from './routes.ts';
import { modelLifeOf } from './service.ts';

const PERIOD_MS = 10 * 60_000;

export function install(ctx: ServerContext): void {
  const life = modelLifeOf(ctx);
  addModelLifeRoutes(ctx.routes, ctx);
  const all = () => {
    for (const u of ctx.ingest.units.keys()) void life.refreshUnit(u);
  };
  ctx.events.on('batch', (e: { event: string; unit: string }) => {
    if (e.event === 'ended') void life.refreshUnit(e.unit);
  });
  const first = setTimeout(all, 0);
  const timer = setInterval(all, PERIOD_MS);
  first.unref();
  timer.unref();
  ctx.onClose(async () => {
    clearTimeout(first);
    clearInterval(timer);
    await life.drain();
  });
}
